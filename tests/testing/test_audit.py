"""The audit row of the reliability plan: random create/update/state changes by random personas give
exactly one audit row per change (field history, readings change or sample event), each with the
actor, a UTC time, the values before and after, and the reason where one is required; refusals
(client users, missing reasons, released test sets) leave no row at all.

The expected outcome of each step comes from the role table written out below (the product rules in
DEVELOPERS.md: technicians and the lab manager enter records and readings, only the manager changes
clients and projects, checkers may exclude stages, every lab role moves samples, client users
change nothing), not from the code under test.
"""

from __future__ import annotations

import hashlib
import struct
from dataclasses import dataclass
from datetime import UTC, date, datetime, timedelta
from decimal import Decimal
from pathlib import Path
from typing import Any

import pytest
from django.contrib.auth.models import User
from django.core.exceptions import ValidationError
from django.core.files.uploadedfile import SimpleUploadedFile
from django.db import models, transaction
from django.test import Client
from django.utils import timezone
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from testing.admin_history import AUDITED_MODELS
from testing.models import (
    Apparatus,
    Borehole,
    ComputationRun,
    ConsolidationReading,
    DirectShearTest,
    ImportState,
    Project,
    ReadingsChange,
    ReadingsSource,
    Sample,
    SampleEvent,
    SampleStatus,
    ShearReadingBlock,
    ShearStage,
    Specimen,
    StageExclusion,
    StageResult,
)
from testing.models.samples import SAMPLE_TRANSITIONS
from testing.selectors_readings import shear_reading_count
from testing.services import release
from testing.services.computation import stage_exclude, stage_include, stage_reduction_request
from testing.services.edits import record_update, specimen_update, stage_update
from testing.services.equipment import apparatus_create
from testing.services.errors import NotAllowed, ServiceError
from testing.services.imports import stage_readings_import
from testing.services.lifecycle import sample_transition
from testing.services.readings_entry import stage_readings_enter
from testing.services.records import borehole_create, specimen_create
from testing.services.shear_setup import shear_test_create, stage_create, stage_readings_store
from tests.conftest import Cast, Records
from tests.importers.conftest import as_bytes, canonical_lines

# --- the role table (product rules, written out independently of testing/access.py) -------------
STAFF = ("technician", "checker", "approver", "manager")
PERSONAS = (*STAFF, "client_a", "client_b", "deactivated")
# Drawn more often: the roles that may change records, so most steps get past the role check.
DRAWN = ("technician", "technician", "manager", "manager", *PERSONAS)
MAY = {
    "records": {"technician", "manager"},  # specimens, stages, boreholes, samples, readings
    "clients": {"manager"},  # organisations and projects
    "exclude": {"technician", "checker", "manager"},
    "move": set(STAFF),  # sample lifecycle
}

# Inputs of the reduction: changing them once a stage has results needs a reason.
SPECIMEN_INPUTS = {"height_mm", "initial_mass_g", "final_mass_g", "length_mm", "width_mm"}
STAGE_INPUTS = {"weights_mass_kg", "lever_ratio", "force_factor_n_per_unit"}

SPECIMEN_VALUES: dict[str, list[Any]] = {
    "height_mm": [20.0, 19.5, 21.0, -1.0],  # -1 breaks the positive-height rule
    "initial_mass_g": [140.0, 150.5],
    "final_mass_g": [None, 145.0],
    "width_mm": [60.0, 59.8],
    "description": ["", "Firm brown sandy CLAY", "Soft grey SILT"],
}
STAGE_VALUES: dict[str, list[Any]] = {
    "weights_mass_kg": [2.0, 4.0, 8.0],
    "lever_ratio": [10.0, 9.5],
    "force_factor_n_per_unit": [1.0, 1.02],
    "notes": ["", "Box re-seated before shearing"],
    "rate_mm_per_min": [0.05, 0.1],
}
RECORD_VALUES: dict[str, dict[str, list[Any]]] = {
    "organisation": {"contact_name": ["", "R. Lindqvist", "A. Okafor"]},
    "project": {"site_name": ["", "Harlow Moss", "Harlow Moss cutting"]},
    "borehole": {"ground_level_m": [None, Decimal("12.30"), Decimal("14.05")]},
    "sample": {"storage_location": ["", "Rack C3", "Cold store 2"]},
}
INVALID = {("specimen", "height_mm", -1.0)}
REASONS = ["", "Re-measured with the calibrated caliper", "Copying error on the sheet"]


@pytest.fixture(autouse=True)
def _media(settings: Any, tmp_path: Path) -> None:
    settings.MEDIA_ROOT = tmp_path / "media"


@dataclass
class Lab:
    cast: Cast
    records: Records
    test: DirectShearTest
    stages: list[ShearStage]  # stage 1 has readings and a result; stage 2 has neither

    def persona(self, name: str) -> User:
        user: User = getattr(self.cast, name)
        return user


def _shear_rows(n: int, scale: float = 1.0) -> list[tuple[int, int, float, float, float, float]]:
    # An invented load-cell curve rising to a plateau.
    return [
        (1, k + 1, 2.0 * k, 0.1 * k, 0.0004 * k, scale * (300.0 - 300.0 / (1.0 + 0.05 * k)))
        for k in range(n)
    ]


def _consolidation_rows(n: int) -> list[tuple[float, float]]:
    return [(float(k * k), 0.01 * k) for k in range(n)]


@pytest.fixture
def lab(cast: Cast, records_a: Records, django_capture_on_commit_callbacks: Any) -> Lab:
    tech = cast.technician
    specimens = [
        specimen_create(
            user=tech,
            sample=records_a.sample,
            reference=ref,
            depth_top_m=Decimal("1.20"),
            preparation="undisturbed",
            length_mm=60.0,
            width_mm=60.0,
            height_mm=20.0,
            initial_mass_g=140.0,
        )
        for ref in ("S1", "S2")
    ]
    test = shear_test_create(
        user=tech,
        project=records_a.project,
        reference="DS-01",
        method="bs-1377-7",
        box_length_mm=60.0,
        box_width_mm=60.0,
        requested_on=date(2026, 11, 3),
    )
    stages = [
        stage_create(
            user=tech,
            test=test,
            specimen=specimen,
            stage_number=n,
            direct_mass_kg=1.25,
            hanger_mass_kg=0.5,
            weights_mass_kg=2.0,
            lever_ratio=10.0,
            force_unit="N",
            rate_mm_per_min=0.05,
            shear_started_at=datetime(2026, 11, 4, 9, 0, tzinfo=UTC),
        )
        for n, specimen in enumerate(specimens, start=1)
    ]
    stage_readings_store(
        user=tech, stage=stages[0], consolidation=_consolidation_rows(6), shear=_shear_rows(80)
    )
    with django_capture_on_commit_callbacks(execute=True):
        stage_reduction_request(stage=stages[0], user=tech, reason="first reduction")
    assert StageResult.objects.filter(stage=stages[0]).exists()
    assert not StageResult.objects.filter(stage=stages[1]).exists()
    return Lab(cast=cast, records=records_a, test=test, stages=stages)


# --- counting every audit table -----------------------------------------------------------------


def _audit_tables() -> dict[str, type[models.Model]]:
    tables: dict[str, type[models.Model]] = {
        m.__name__: m.history.model  # type: ignore[attr-defined]
        for m in AUDITED_MODELS
    }
    tables["ReadingsChange"] = ReadingsChange
    tables["SampleEvent"] = SampleEvent
    return tables


def _counts() -> dict[str, int]:
    return {name: model._default_manager.count() for name, model in _audit_tables().items()}


def _delta(before: dict[str, int]) -> dict[str, int]:
    after = _counts()
    return {k: after[k] - before[k] for k in after if after[k] != before[k]}


def _is_utc_between(moment: datetime, start: datetime, end: datetime) -> bool:
    return moment.utcoffset() == timedelta(0) and start <= moment <= end


def _latest_history(instance: models.Model) -> Any:
    return instance.history.order_by("-history_id").first()  # type: ignore[attr-defined]


def _readings_digest_by_hand(stage: ShearStage) -> str:
    """The digest as ReadingsChange documents it, recomputed row by row with struct (IEEE-754
    little-endian doubles) and hashlib's sha256 (FIPS 180-4), independently of the service."""
    cons = ConsolidationReading.objects.filter(stage=stage).order_by("elapsed_min")
    c = hashlib.sha256(
        b"".join(struct.pack("<2d", r.elapsed_min + 0.0, r.settlement_mm + 0.0) for r in cons)
    ).hexdigest()
    # Shear readings are stored in column blocks: reading first_seq + i of a block is the i-th
    # little-endian double of each of its columns; unpacked here with struct, not the selectors.
    shear = []
    for block in ShearReadingBlock.objects.filter(stage=stage).order_by("traverse", "first_seq"):
        columns = [
            struct.unpack(f"<{block.count}d", bytes(getattr(block, name)))
            for name in ("elapsed_min", "horizontal_mm", "vertical_mm", "force_reading")
        ]
        for i in range(block.count):
            shear.append((block.traverse, block.first_seq + i, *(col[i] for col in columns)))
    s = hashlib.sha256(
        b"".join(
            struct.pack(
                "<6d",
                float(traverse),
                float(seq),
                elapsed_min + 0.0,
                horizontal_mm + 0.0,
                vertical_mm + 0.0,
                force_reading + 0.0,
            )
            for traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading in shear
        )
    ).hexdigest()
    text = f"consolidation {cons.count()} {c}\nshear {len(shear)} {s}\n"
    return hashlib.sha256(text.encode()).hexdigest()


# --- one random step ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Step:
    action: str
    persona: str
    target: int = 0  # which stage / specimen / record
    field: str = ""
    value: Any = None
    reason: str = ""


def _update_steps() -> st.SearchStrategy[Step]:
    specimen = st.sampled_from(sorted(SPECIMEN_VALUES)).flatmap(
        lambda f: st.builds(
            Step,
            action=st.just("specimen"),
            persona=st.sampled_from(DRAWN),
            target=st.integers(0, 1),
            field=st.just(f),
            value=st.sampled_from(SPECIMEN_VALUES[f]),
            reason=st.sampled_from(REASONS),
        )
    )
    stage = st.sampled_from(sorted(STAGE_VALUES)).flatmap(
        lambda f: st.builds(
            Step,
            action=st.just("stage"),
            persona=st.sampled_from(DRAWN),
            target=st.integers(0, 1),
            field=st.just(f),
            value=st.sampled_from(STAGE_VALUES[f]),
            reason=st.sampled_from(REASONS),
        )
    )
    record = st.sampled_from(sorted(RECORD_VALUES)).flatmap(
        lambda kind: st.builds(
            Step,
            action=st.just(kind),
            persona=st.sampled_from(DRAWN),
            field=st.just(next(iter(RECORD_VALUES[kind]))),
            value=st.sampled_from(next(iter(RECORD_VALUES[kind].values()))),
            reason=st.sampled_from(REASONS),
        )
    )
    return st.one_of(specimen, stage, record)


def _other_steps() -> st.SearchStrategy[Step]:
    persona = st.sampled_from(DRAWN)
    return st.one_of(
        st.builds(
            Step,
            action=st.just("move"),
            persona=persona,
            value=st.sampled_from(list(SampleStatus)),
            reason=st.sampled_from(["", "Client asked us to wait"]),
        ),
        st.builds(
            Step,
            action=st.just("readings"),
            persona=persona,
            target=st.integers(0, 1),
            value=st.tuples(st.integers(0, 4), st.integers(0, 40)),
            reason=st.sampled_from(REASONS),
        ),
        st.builds(
            Step,
            action=st.just("create_borehole"),
            persona=persona,
            value=st.sampled_from(["BH02", "BH03"]),
        ),
        st.builds(
            Step,
            action=st.just("create_specimen"),
            persona=persona,
            value=st.sampled_from(["S3", "S4"]),
        ),
        st.builds(
            Step,
            action=st.just("exclude"),
            persona=persona,
            target=st.integers(0, 1),
            reason=st.sampled_from(["Specimen disturbed when trimming", "Box tilted"]),
        ),
        st.builds(Step, action=st.just("include"), persona=persona, target=st.integers(0, 1)),
        st.builds(Step, action=st.just("create_apparatus"), persona=persona, value=st.just("SB-9")),
    )


def _update_target(lab: Lab, step: Step) -> models.Model:
    if step.action == "specimen":
        return Specimen.objects.get(pk=lab.stages[step.target].specimen_id)
    if step.action == "stage":
        return ShearStage.objects.get(pk=lab.stages[step.target].pk)
    return {
        "organisation": lambda: lab.cast.org_a,
        "project": lambda: Project.objects.get(pk=lab.records.project.pk),
        "borehole": lambda: Borehole.objects.get(pk=lab.records.borehole.pk),
        "sample": lambda: Sample.objects.get(pk=lab.records.sample.pk),
    }[step.action]()


def _check_update(lab: Lab, step: Step, user: User) -> str:
    target = _update_target(lab, step)
    target.refresh_from_db()
    old = getattr(target, step.field)
    role = "clients" if step.action in {"organisation", "project"} else "records"
    inputs = SPECIMEN_INPUTS if step.action == "specimen" else STAGE_INPUTS
    has_results = step.action in {"specimen", "stage"} and step.target == 0
    before = _counts()
    start = timezone.now()
    call = {
        "specimen": lambda: specimen_update(
            specimen=target, user=user, reason=step.reason, **{step.field: step.value}
        ),
        "stage": lambda: stage_update(
            stage=target, user=user, reason=step.reason, **{step.field: step.value}
        ),
    }.get(
        step.action,
        lambda: record_update(
            record=target, user=user, reason=step.reason, **{step.field: step.value}
        ),
    )
    if step.persona not in MAY[role]:
        with pytest.raises(NotAllowed):
            call()
        assert _delta(before) == {}
        return "refused (role)"
    if old == step.value:
        call()
        assert _delta(before) == {}, "a save that changes nothing writes no history"
        return "unchanged"
    if (step.action, step.field, step.value) in INVALID:
        with pytest.raises(ServiceError):
            call()
        assert _delta(before) == {}
        return "refused (invalid)"
    if has_results and step.field in inputs and not step.reason:
        with pytest.raises(ServiceError, match="Give the reason for changing"):
            call()
        assert _delta(before) == {}
        return "refused (reason required)"
    call()
    end = timezone.now()
    assert _delta(before) == {type(target).__name__: 1}
    row = _latest_history(target)
    assert row.history_type == "~"
    assert row.history_user == user
    assert _is_utc_between(row.history_date, start, end)
    assert (row.history_change_reason or "") == step.reason
    changes = {c.field: (c.old, c.new) for c in row.diff_against(row.prev_record).changes}
    assert changes == {step.field: (old, step.value)}
    return "one row"


def _check_move(lab: Lab, step: Step, user: User) -> str:
    sample = Sample.objects.get(pk=lab.records.sample.pk)
    target = SampleStatus(step.value)
    before = _counts()
    start = timezone.now()
    needs_note = target in {SampleStatus.ON_HOLD, SampleStatus.DISPOSED}
    allowed = step.persona in MAY["move"]
    if (
        not allowed
        or (needs_note and not step.reason)
        or target not in SAMPLE_TRANSITIONS[sample.status]
    ):
        with pytest.raises(ServiceError):
            sample_transition(sample=sample, to_status=target, user=user, note=step.reason)
        assert _delta(before) == {}
        return "no row"
    old = sample.status
    event = sample_transition(sample=sample, to_status=target, user=user, note=step.reason)
    # One event, and no field-history row for the status move.
    assert _delta(before) == {"SampleEvent": 1}
    assert (event.by, event.from_status, event.to_status, event.note) == (
        user,
        old,
        target,
        step.reason,
    )
    assert _is_utc_between(event.at, start, timezone.now())
    return "one row"


def _check_readings(lab: Lab, step: Step, user: User) -> str:
    stage = ShearStage.objects.get(pk=lab.stages[step.target].pk)
    n_cons, n_shear = step.value
    before = _counts()
    counts_before = (stage.consolidation_readings.count(), shear_reading_count(stage.pk))
    digest_before = _readings_digest_by_hand(stage)
    start = timezone.now()
    if step.persona not in MAY["records"]:
        with pytest.raises(NotAllowed):
            stage_readings_store(user=user, stage=stage, shear=_shear_rows(n_shear))
        assert _delta(before) == {}
        return "no row"
    stage_readings_store(
        user=user,
        stage=stage,
        consolidation=_consolidation_rows(n_cons),
        shear=_shear_rows(n_shear, scale=1.0 + 0.01 * n_cons),
        reason=step.reason,
    )
    assert _delta(before) == {"ReadingsChange": 1}
    change = ReadingsChange.objects.latest("id")
    assert change.by == user and change.stage == stage and change.source == ReadingsSource.STORED
    assert _is_utc_between(change.at, start, timezone.now())
    assert change.reason == step.reason
    assert (change.consolidation_rows_before, change.shear_rows_before) == counts_before
    assert (change.consolidation_rows_after, change.shear_rows_after) == (n_cons, n_shear)
    assert change.sha256_before == digest_before
    assert change.sha256_after == _readings_digest_by_hand(stage)
    return "one row"


def _check_create(lab: Lab, step: Step, user: User) -> str:
    before = _counts()
    start = timezone.now()
    if step.action == "create_borehole":
        model: type[models.Model] = Borehole
        exists = Borehole.objects.filter(project=lab.records.project, reference=step.value)
        allowed = step.persona in MAY["records"]

        def call() -> models.Model:
            return borehole_create(user=user, project=lab.records.project, reference=step.value)

    elif step.action == "create_specimen":
        model = Specimen
        exists = Specimen.objects.filter(sample=lab.records.sample, reference=step.value)
        allowed = step.persona in MAY["records"]

        def call() -> models.Model:
            return specimen_create(
                user=user,
                sample=lab.records.sample,
                reference=step.value,
                depth_top_m=Decimal("1.30"),
                preparation="remoulded",
                length_mm=60.0,
                width_mm=60.0,
                height_mm=20.0,
                initial_mass_g=138.0,
            )

    else:
        model = Apparatus
        exists = Apparatus.objects.filter(reference=step.value)
        allowed = step.persona in MAY["clients"]  # the equipment register is the manager's

        def call() -> models.Model:
            return apparatus_create(
                user=user, reference=step.value, box_length_mm=60.0, box_width_mm=60.0
            )

    if not allowed or exists.exists():
        with pytest.raises((ServiceError, ValidationError)):
            call()
        assert _delta(before) == {}
        return "no row"
    created = call()
    assert _delta(before) == {model.__name__: 1}
    row = _latest_history(created)
    assert (row.history_type, row.history_user) == ("+", user)
    assert _is_utc_between(row.history_date, start, timezone.now())
    return "one row"


def _check_exclusion(lab: Lab, step: Step, user: User) -> str:
    stage = ShearStage.objects.get(pk=lab.stages[step.target].pk)
    existing = StageExclusion.objects.filter(stage=stage, envelope_type="peak").first()
    before = _counts()
    start = timezone.now()
    if step.persona not in MAY["exclude"]:
        if step.action == "exclude":
            with pytest.raises(NotAllowed):
                stage_exclude(stage=stage, envelope_type="peak", reason=step.reason, user=user)
        else:
            with pytest.raises(NotAllowed):
                stage_include(stage=stage, envelope_type="peak", user=user)
        assert _delta(before) == {}
        return "no row"
    if step.action == "exclude":
        exclusion = stage_exclude(stage=stage, envelope_type="peak", reason=step.reason, user=user)
        expected_type = "~" if existing is not None else "+"
        assert _delta(before) == {"StageExclusion": 1}
        row = _latest_history(exclusion)
        assert row.history_change_reason == step.reason
        assert row.reason == step.reason
    else:
        stage_include(stage=stage, envelope_type="peak", user=user)
        if existing is None:
            assert _delta(before) == {}
            return "no row"
        expected_type = "-"
        assert _delta(before) == {"StageExclusion": 1}
        row = StageExclusion.history.order_by("-history_id").first()  # type: ignore[attr-defined]
        assert row.reason == existing.reason  # the deleted exclusion's last values are kept
    assert (row.history_type, row.history_user) == (expected_type, user)
    assert _is_utc_between(row.history_date, start, timezone.now())
    return "one row"


def _run(lab: Lab, step: Step) -> None:
    user = lab.persona(step.persona)
    if step.action in {"specimen", "stage", "organisation", "project", "borehole", "sample"}:
        outcome = _check_update(lab, step, user)
    elif step.action == "move":
        outcome = _check_move(lab, step, user)
    elif step.action == "readings":
        outcome = _check_readings(lab, step, user)
    elif step.action in {"exclude", "include"}:
        outcome = _check_exclusion(lab, step, user)
    else:
        outcome = _check_create(lab, step, user)
    event(f"{step.action}: {outcome}")


class _Rollback(Exception):
    pass


@settings(
    max_examples=25,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
@given(steps=st.lists(st.one_of(_update_steps(), _other_steps()), min_size=1, max_size=8))
def test_random_changes_by_random_personas_give_one_audit_row_each(
    lab: Lab, steps: list[Step]
) -> None:
    # Each example starts from the same lab: its changes are rolled back afterwards.
    try:
        with transaction.atomic():
            for step in steps:
                _run(lab, step)
            raise _Rollback
    except _Rollback:
        pass


# --- the fixed cases ----------------------------------------------------------------------------


def test_client_users_change_nothing_and_leave_no_history(lab: Lab) -> None:
    specimen = Specimen.objects.get(pk=lab.stages[1].specimen_id)
    before = _counts()
    for user in (lab.cast.client_a, lab.cast.client_b):
        with pytest.raises(NotAllowed):
            specimen_update(specimen=specimen, user=user, reason="x", height_mm=19.0)
        with pytest.raises(NotAllowed):
            stage_update(stage=lab.stages[1], user=user, reason="x", notes="mine")
        with pytest.raises(NotAllowed):
            record_update(record=lab.records.sample, user=user, storage_location="home")
        with pytest.raises(NotAllowed):
            stage_readings_store(user=user, stage=lab.stages[1], shear=_shear_rows(3))
    assert _delta(before) == {}
    specimen.refresh_from_db()
    assert specimen.height_mm == 20.0


def test_a_reason_is_required_for_loading_and_dimensions_once_there_are_results(lab: Lab) -> None:
    tech = lab.cast.technician
    with_results, without = lab.stages
    before = _counts()
    with pytest.raises(ServiceError, match="Give the reason for changing the loading"):
        stage_update(stage=with_results, user=tech, weights_mass_kg=4.0)
    with pytest.raises(ServiceError, match="Give the reason for changing the dimensions"):
        specimen_update(specimen=with_results.specimen, user=tech, height_mm=19.0)
    assert _delta(before) == {}
    # Without results, or for a field that is not an input, no reason is needed.
    stage_update(stage=without, user=tech, weights_mass_kg=4.0)
    stage_update(stage=with_results, user=tech, notes="Checked the hanger")
    assert _delta(before) == {"ShearStage": 2}
    # With the reason the change is kept, the reason with it, and the stage is reduced again.
    runs_before = ComputationRun.objects.filter(stage=with_results).count()
    stage_update(stage=with_results, user=tech, reason="Wrong slotted weight", weights_mass_kg=4.0)
    row = _latest_history(with_results)
    assert (row.history_change_reason, row.weights_mass_kg, row.prev_record.weights_mass_kg) == (
        "Wrong slotted weight",
        4.0,
        2.0,
    )
    assert ComputationRun.objects.filter(stage=with_results).count() == runs_before + 1


def test_nothing_changes_once_the_test_set_is_released(lab: Lab) -> None:
    tech, manager = lab.cast.technician, lab.cast.manager
    assert release.test_mark_released(test=lab.test, at=timezone.now())
    stage = ShearStage.objects.select_related("test").get(pk=lab.stages[0].pk)
    before = _counts()
    for user in (tech, manager):
        with pytest.raises(ServiceError, match="reported"):
            specimen_update(specimen=stage.specimen, user=user, reason="late", height_mm=19.0)
        with pytest.raises(ServiceError, match="reported"):
            stage_update(stage=stage, user=user, reason="late", weights_mass_kg=4.0)
        with pytest.raises(ServiceError, match="reported"):
            stage_readings_store(user=user, stage=stage, shear=_shear_rows(5), reason="late")
        with pytest.raises(ServiceError, match="reported"):
            stage_exclude(stage=stage, envelope_type="peak", reason="late", user=user)
    assert _delta(before) == {}
    stage.refresh_from_db()
    assert stage.weights_mass_kg == 2.0 and shear_reading_count(stage.pk) == 80


def test_readings_replace_records_counts_and_both_hashes(lab: Lab) -> None:
    tech = lab.cast.technician
    stage = lab.stages[0]
    first = ReadingsChange.objects.get(stage=stage)  # the fixture's store
    assert (first.consolidation_rows_before, first.shear_rows_before) == (0, 0)
    assert (first.consolidation_rows_after, first.shear_rows_after) == (6, 80)
    # sha256 of the text for an empty stage (two empty phases), worked by hand from the documented rule.
    empty = hashlib.sha256(b"").hexdigest()
    assert (
        first.sha256_before
        == hashlib.sha256(f"consolidation 0 {empty}\nshear 0 {empty}\n".encode()).hexdigest()
    )
    digest_before = _readings_digest_by_hand(stage)
    assert first.sha256_after == digest_before

    stage_readings_store(
        user=tech, stage=stage, shear=_shear_rows(50, scale=1.1), reason="Logger clock was wrong"
    )
    change = ReadingsChange.objects.filter(stage=stage).latest("id")
    assert (change.consolidation_rows_before, change.shear_rows_before) == (6, 80)
    assert (change.consolidation_rows_after, change.shear_rows_after) == (0, 50)
    assert change.sha256_before == digest_before == first.sha256_after
    assert change.sha256_after == _readings_digest_by_hand(stage) != digest_before
    assert (change.by, change.reason) == (tech, "Logger clock was wrong")


def test_imports_and_grid_entry_record_one_readings_change_each(lab: Lab) -> None:
    tech = lab.cast.technician
    stage = lab.stages[1]
    data = as_bytes(canonical_lines(n_shear=20, n_cons=4))
    record = stage_readings_import(
        user=tech, stage=stage, upload=SimpleUploadedFile("bh01-s2.csv", data), reason="first file"
    )
    assert record.state == ImportState.SUCCEEDED
    change = ReadingsChange.objects.get(stage=stage)
    assert (change.source, change.reading_import, change.by, change.reason) == (
        ReadingsSource.IMPORTED,
        record,
        tech,
        "first file",
    )
    assert (change.consolidation_rows_before, change.shear_rows_before) == (0, 0)
    assert (change.consolidation_rows_after, change.shear_rows_after) == (4, 20)
    assert change.sha256_after == _readings_digest_by_hand(stage)

    # The same file again adds nothing, so no readings change either.
    again = stage_readings_import(user=tech, stage=stage, upload=SimpleUploadedFile("x.csv", data))
    assert again.state == ImportState.DUPLICATE
    assert ReadingsChange.objects.filter(stage=stage).count() == 1

    # A shear-only file replaces the shear phase and keeps the consolidation readings.
    shear_only = as_bytes(canonical_lines(n_shear=30))
    stage_readings_import(user=tech, stage=stage, upload=SimpleUploadedFile("b.csv", shear_only))
    second = ReadingsChange.objects.filter(stage=stage).latest("id")
    assert second.sha256_before == change.sha256_after
    assert (second.consolidation_rows_after, second.shear_rows_after) == (4, 30)
    assert second.sha256_after == _readings_digest_by_hand(stage)

    stage_readings_enter(
        user=tech,
        stage=stage,
        rows=[
            {"time_min": 0, "horizontal_mm": 0, "vertical_mm": 0, "force": 0},
            {"time_min": 1, "horizontal_mm": 0.2, "vertical_mm": 0.01, "force": 55},
        ],
        reason="Typed from the paper sheet",
    )
    third = ReadingsChange.objects.filter(stage=stage).latest("id")
    assert (third.source, third.sha256_before) == (ReadingsSource.ENTERED, second.sha256_after)
    assert (third.consolidation_rows_after, third.shear_rows_after) == (4, 2)
    assert third.sha256_after == _readings_digest_by_hand(stage)


def test_readings_changes_and_history_rows_cannot_be_edited_or_deleted(lab: Lab) -> None:
    change = ReadingsChange.objects.get(stage=lab.stages[0])
    change.reason = "rewritten"
    with pytest.raises(ValueError, match="append-only"):
        change.save()
    with pytest.raises(ValueError, match="append-only"):
        change.delete()
    row = _latest_history(lab.stages[0])
    row.history_change_reason = "rewritten"
    with pytest.raises(ValueError, match="append-only"):
        row.save()
    with pytest.raises(ValueError, match="append-only"):
        row.delete()
    change.refresh_from_db()
    assert change.reason == ""


def test_the_admin_shows_who_changed_what_and_why(lab: Lab) -> None:
    stage_update(
        stage=lab.stages[1], user=lab.cast.technician, reason="Hanger swapped", lever_ratio=9.5
    )
    boss = User.objects.create_superuser("labadmin", "labadmin@example.org", "pw-for-admin-1")
    client = Client()
    client.force_login(boss)
    page = client.get(f"/admin/testing/shearstage/{lab.stages[1].pk}/history/")
    assert page.status_code == 200
    text = page.content.decode()
    assert "Hanger swapped" in text and "tech" in text
    log = client.get("/admin/testing/readingschange/")
    assert log.status_code == 200 and "DS-01" in log.content.decode()
