"""Reads for the client portal, each scoped through ``testing.access`` and ``reports.selectors``.

What a client sees: their organisation's projects, boreholes and samples (with each sample's
lifecycle state), their issued report revisions, and — only for test sets a signed report has
released — the strength results exactly as that report froze them. Results are read from the
revision's snapshot (``ReportRevision.content``), never from the live result rows, so a later
recomputation cannot change what a client was issued.
"""

from __future__ import annotations

import math
import uuid
from collections import defaultdict
from dataclasses import dataclass, field
from typing import Any

from django.core.cache import cache
from django.db.models import Count, Prefetch, Q
from django.http import Http404

from reports import selectors as report_selectors
from reports.models import ReportRevision, RevisionState
from reports.verification import verify_pdf_bytes
from testing import access
from testing.access import AnyUser
from testing.models import Borehole, DirectShearTest, Project, Sample, SampleStatus, ShearStage

# The working path of a sample through the lab, in order; "on hold" and "disposed" sit outside it.
SAMPLE_STEPS: tuple[tuple[str, str], ...] = (
    (SampleStatus.RECEIVED, "Received"),
    (SampleStatus.SCHEDULED, "Scheduled"),
    (SampleStatus.IN_TEST, "In test"),
    (SampleStatus.TESTED, "Tested, being checked"),
    (SampleStatus.REPORTED, "Reported"),
)
_STEP_INDEX = {status: i for i, (status, _) in enumerate(SAMPLE_STEPS)}

# How long a stored PDF's check (fingerprint and signature) is reused: the file never changes
# once issued, and a changed file shows up within this time.
FILE_CHECK_SECONDS = 600


# --- Home: projects with progress ----------------------------------------------------------------


@dataclass(frozen=True)
class ProjectProgress:
    project: Project
    samples: int
    reported: int
    in_progress: int
    on_hold: int
    disposed: int
    released_tests: int

    @property
    def reported_pct(self) -> int:
        """Share of the project's samples reported [%], rounded down."""
        return (100 * self.reported) // self.samples if self.samples else 0


def projects_for_portal(*, user: AnyUser) -> list[ProjectProgress]:
    """The user's visible projects with sample counts by state (one query)."""
    in_progress = [
        SampleStatus.RECEIVED,
        SampleStatus.SCHEDULED,
        SampleStatus.IN_TEST,
        SampleStatus.TESTED,
    ]
    status = "boreholes__samples__status"
    projects = (
        Project.objects.filter(access.project_filter(user))
        .select_related("organisation")
        .annotate(
            n_samples=Count("boreholes__samples", distinct=True),
            n_reported=Count(
                "boreholes__samples",
                filter=Q(**{status: SampleStatus.REPORTED}),
                distinct=True,
            ),
            n_in_progress=Count(
                "boreholes__samples", filter=Q(**{f"{status}__in": in_progress}), distinct=True
            ),
            n_on_hold=Count(
                "boreholes__samples", filter=Q(**{status: SampleStatus.ON_HOLD}), distinct=True
            ),
            n_disposed=Count(
                "boreholes__samples", filter=Q(**{status: SampleStatus.DISPOSED}), distinct=True
            ),
            n_released=Count(
                "shear_tests", filter=Q(shear_tests__released_at__isnull=False), distinct=True
            ),
        )
        .order_by("reference")
    )
    return [
        ProjectProgress(
            project=p,
            samples=p.n_samples,
            reported=p.n_reported,
            in_progress=p.n_in_progress,
            on_hold=p.n_on_hold,
            disposed=p.n_disposed,
            released_tests=p.n_released,
        )
        for p in projects
    ]


# --- Home: issued revisions with their state and file check ------------------------------------


@dataclass(frozen=True)
class FileCheck:
    """Whether the stored PDF is still exactly what was issued, with an intact lab signature."""

    intact: bool
    message: str


@dataclass(frozen=True)
class IssuedRevision:
    revision: ReportRevision
    current: ReportRevision | None  # the report's current issued revision (None if withdrawn)
    check: FileCheck

    @property
    def tests(self) -> list[tuple[int, str]]:
        """(test set id, reference) of each test set in the revision, from its frozen content."""
        return [(t["test_id"], t["reference"]) for t in self.revision.content.get("tests", [])]

    @property
    def state_label(self) -> str:
        if self.revision.state == RevisionState.ISSUED:
            return "Current"
        if self.revision.state == RevisionState.SUPERSEDED:
            return "Superseded"
        return "Withdrawn"


def revision_file_check(revision: ReportRevision) -> FileCheck:
    """Check the stored PDF: its sha256 is the recorded one and its lab signature verifies.

    Reused from the cache for ``FILE_CHECK_SECONDS`` (checking a signature takes a while and the
    file never changes once issued). A missing or unreadable file is reported, never raised.
    """
    key = f"tauline:portal:pdf-check:{revision.pk}:{revision.pdf_sha256}"
    cached = cache.get(key)
    if isinstance(cached, tuple) and len(cached) == 2:
        return FileCheck(intact=bool(cached[0]), message=str(cached[1]))
    check = _check_file(revision)
    cache.set(key, (check.intact, check.message), FILE_CHECK_SECONDS)
    return check


def _check_file(revision: ReportRevision) -> FileCheck:
    if not revision.pdf:
        return FileCheck(False, "No stored PDF: ask the laboratory.")
    try:
        with revision.pdf.open("rb") as fh:
            data = fh.read()
    except OSError:
        return FileCheck(False, "The stored PDF cannot be read: ask the laboratory.")
    result = verify_pdf_bytes(data)
    if result.authentic and result.revision is not None and result.revision.pk == revision.pk:
        return FileCheck(True, "Signature intact; the file is exactly as issued.")
    return FileCheck(False, "The stored file does not check: ask the laboratory.")


def issued_revisions_for_portal(*, user: AnyUser) -> list[IssuedRevision]:
    """Every issued revision the user may see (current, superseded, withdrawn after issue), each
    with its report's current revision and the check of its stored PDF (one query)."""
    revisions = list(report_selectors.revisions_for_user(user=user).filter(issued_at__isnull=False))
    current = {r.report_id: r for r in revisions if r.state == RevisionState.ISSUED}
    return [
        IssuedRevision(revision=r, current=current.get(r.report_id), check=revision_file_check(r))
        for r in revisions
    ]


# --- Project page: boreholes, samples and their progress ---------------------------------------


@dataclass(frozen=True)
class SampleProgress:
    sample: Sample
    released_tests: list[tuple[int, str]]  # (test set id, reference) released by an issued report

    @property
    def step(self) -> int:
        """1-based position on the working path; 0 for on hold and disposed."""
        index = _STEP_INDEX.get(self.sample.status)
        return 0 if index is None else index + 1

    @property
    def steps(self) -> int:
        return len(SAMPLE_STEPS)

    @property
    def label(self) -> str:
        return dict(SAMPLE_STEPS).get(self.sample.status, self.sample.get_status_display())


@dataclass(frozen=True)
class BoreholeSamples:
    borehole: Borehole
    samples: list[SampleProgress] = field(default_factory=list)


def project_page(*, user: AnyUser, project: Project) -> list[BoreholeSamples]:
    """The project's boreholes with their samples in depth order, each sample with the test sets
    that an issued report has released (two queries: boreholes with samples, released stages)."""
    samples = Sample.objects.filter(access.sample_filter(user)).order_by("depth_top_m", "reference")
    boreholes = list(
        Borehole.objects.filter(access.borehole_filter(user), project=project)
        .prefetch_related(Prefetch("samples", queryset=samples))
        .order_by("reference")
    )
    released: dict[int, dict[int, str]] = defaultdict(dict)
    visible_stages = (
        # The portal shows released work only, to staff as well (it is the client's view).
        ShearStage.objects.filter(
            access.stage_filter(user), test__project=project, test__released_at__isnull=False
        )
        .values_list("specimen__sample_id", "test_id", "test__reference")
        .order_by("test__reference")
    )
    for sample_id, test_id, reference in visible_stages:
        released[sample_id][test_id] = reference
    return [
        BoreholeSamples(
            borehole=b,
            samples=[
                SampleProgress(sample=s, released_tests=sorted(released[s.pk].items(), key=_by_ref))
                for s in b.samples.all()
            ],
        )
        for b in boreholes
    ]


def _by_ref(item: tuple[int, str]) -> str:
    return item[1]


# --- Strength page: the frozen results of a released test set -----------------------------------


@dataclass(frozen=True)
class EnvelopeSummary:
    label: str
    n: int
    through_origin: bool
    cohesion_kpa: float | None
    stderr_cohesion_kpa: float | None
    friction_angle_deg: float | None
    stderr_friction_angle_deg: float | None
    friction_angle_ci95_deg: list[float | None]
    cohesion_ci95_kpa: list[float | None]
    normal_stress_min_kpa: float | None
    normal_stress_max_kpa: float | None
    r_squared: float | None
    warnings: list[str]


def stderr_friction_angle_deg(tan_phi: float | None, stderr_tan_phi: float | None) -> float | None:
    """SE of φ′ [°] from the SE of tanφ′ by the delta method: dφ/d(tanφ) = 1 / (1 + tan²φ)."""
    if tan_phi is None or stderr_tan_phi is None:
        return None
    return math.degrees(stderr_tan_phi / (1.0 + tan_phi * tan_phi))


def _warning_text(warning: Any) -> str:
    """A stored quality flag (a dict with its message) or plain text, as a sentence."""
    if isinstance(warning, dict):
        return str(warning.get("message") or warning.get("code") or "")
    return str(warning)


def envelope_summary(envelope: dict[str, Any]) -> EnvelopeSummary:
    low, high = envelope["normal_stress_range_kpa"]
    return EnvelopeSummary(
        label=envelope["label"],
        n=int(envelope["n"]),
        through_origin=bool(envelope["through_origin"]),
        cohesion_kpa=envelope["cohesion_kpa"],
        stderr_cohesion_kpa=envelope["stderr_cohesion_kpa"],
        friction_angle_deg=envelope["friction_angle_deg"],
        stderr_friction_angle_deg=stderr_friction_angle_deg(
            envelope["tan_phi"], envelope["stderr_tan_phi"]
        ),
        friction_angle_ci95_deg=list(envelope["friction_angle_ci95_deg"]),
        cohesion_ci95_kpa=list(envelope["cohesion_ci95_kpa"]),
        normal_stress_min_kpa=low,
        normal_stress_max_kpa=high,
        r_squared=envelope["r_squared"],
        warnings=[_warning_text(w) for w in envelope.get("warnings", [])],
    )


@dataclass(frozen=True)
class StrengthPage:
    test: DirectShearTest
    revision: ReportRevision | None  # the issued revision whose frozen values are shown
    current: ReportRevision | None  # the report's current revision, when ``revision`` is not it
    content: dict[str, Any] | None  # the test set's item of the revision's frozen content
    envelopes: list[EnvelopeSummary]


def current_revision_of(*, user: AnyUser, revision: ReportRevision) -> ReportRevision | None:
    """The current issued revision of the same report, when ``revision`` is not it."""
    if revision.state == RevisionState.ISSUED:
        return None
    return (
        report_selectors.revisions_for_user(user=user)
        .filter(report=revision.report_id, state=RevisionState.ISSUED)
        .first()
    )


def _test_item(revision: ReportRevision, test_id: int) -> dict[str, Any] | None:
    for item in revision.content.get("tests", []):
        if item.get("test_id") == test_id:
            return dict(item)
    return None


def strength_page(
    *, user: AnyUser, test_id: object, public_id: uuid.UUID | str | None = None
) -> StrengthPage:
    """A released test set and its results as frozen in an issued revision.

    Without ``public_id``: the current issued revision that covers the set. With it: that
    revision (current, superseded or withdrawn), which must cover the set. A set no signed report
    released, or of another organisation, answers 404 like a missing one.
    """
    test = access.test_get_for_user(user=user, test_id=test_id)
    if test.released_at is None:  # the portal shows released work only, to staff as well
        raise Http404("No such record.")
    issued = report_selectors.revisions_for_user(user=user).filter(state=RevisionState.ISSUED)
    current: ReportRevision | None = None
    if public_id is None:
        revision = issued.filter(report__tests=test).order_by("-issued_at").first()
    else:
        revision = report_selectors.revision_get_by_public_id(user=user, public_id=public_id)
        if revision.issued_at is None or not revision.report.tests.filter(pk=test.pk).exists():
            raise Http404("No such record.")
        current = current_revision_of(user=user, revision=revision)
    item = None
    if revision is not None and revision.state != RevisionState.WITHDRAWN:
        item = _test_item(revision, test.pk)  # a withdrawn revision's values are not to be used
    return StrengthPage(
        test=test,
        revision=revision,
        current=current,
        content=item,
        envelopes=[envelope_summary(e) for e in item["envelopes"]] if item else [],
    )
