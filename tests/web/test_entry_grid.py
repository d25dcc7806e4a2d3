"""The manual-entry grid on the stage page: drawn without scripts, saved through the readings
service, rejected rows re-drawn and marked, and the live "reduced values" endpoint.

Reduction of readings (BS 1377-7 / ASTM D3080): force [N] = (reading − zero) × ring constant
[N/div] for a proving ring; shear stress τ [kPa] = 1000 · F [N] / A [mm²] on the nominal plan area.
Settlement is compression positive and vertical movement upward positive (common practice), so
vertical = −settlement.
"""

from __future__ import annotations

import math
from html.parser import HTMLParser
from typing import Any

import pytest
from django.test import Client
from django.urls import reverse

from testing.forms import upward_from_settlement
from testing.models import ConsolidationReading, ShearStage
from testing.selectors_readings import shear_columns, shear_reading_count
from tests.conftest import Cast, Records
from tests.importers.conftest import make_stage

RING_CONSTANT_N_PER_DIV = 1.52  # an invented ring, set on the stage below
BOX_AREA_MM2 = 60.0 * 60.0  # make_stage's 60 mm square box


def make_ring_stage(cast: Cast, records: Records) -> ShearStage:
    """A lever-loaded stage read through a proving ring of 1.52 N per division, zero 0."""
    return make_stage(
        cast,
        records,
        1,
        force_unit="div",
        force_factor_n_per_unit=RING_CONSTANT_N_PER_DIV,
        force_zero_reading=0.0,
    )


@pytest.fixture
def ring(cast: Cast, records_a: Records) -> ShearStage:
    return make_ring_stage(cast, records_a)


@pytest.fixture
def load_cell(cast: Cast, records_a: Records) -> ShearStage:
    return make_stage(cast, records_a, 2, force_unit="N", force_factor_n_per_unit=1.0)


def _signed_in(cast: Cast, persona: str, **kwargs: Any) -> Client:
    client = Client(**kwargs)
    client.force_login(getattr(cast, persona))
    return client


class _GridInputs(HTMLParser):
    """The text inputs inside ``form#entry-grid``, with their attributes; and the rows marked bad."""

    def __init__(self) -> None:
        super().__init__()
        self.inside = False
        self.depth = 0
        self.inputs: dict[str, dict[str, str]] = {}
        self.bad_rows: list[str] = []
        self.headers: list[str] = []
        self._in_th = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = {k: v or "" for k, v in attrs}
        if tag == "form" and a.get("id") == "entry-grid":
            self.inside = True
        if not self.inside:
            return
        if tag == "input" and a.get("type") == "text":
            self.inputs[a["name"]] = a
        if tag == "tr" and "bad" in a.get("class", "").split():
            self.bad_rows.append(a.get("data-row", ""))
        if tag == "th" and a.get("scope") == "col":
            self._in_th = True
            self.headers.append("")

    def handle_endtag(self, tag: str) -> None:
        if tag == "form":
            self.inside = False
        if tag == "th":
            self._in_th = False

    def handle_data(self, data: str) -> None:
        if self._in_th:
            self.headers[-1] += data


def _grid_of(html: bytes) -> _GridInputs:
    parser = _GridInputs()
    parser.feed(html.decode())
    return parser


def _shear(number: int, t: object, x: object, y: object, f: object) -> dict[str, str]:
    return {
        f"shear-{number}-time_min": str(t),
        f"shear-{number}-horizontal_mm": str(x),
        f"shear-{number}-vertical_mm": str(y),
        f"shear-{number}-force": str(f),
    }


def _cons(number: int, t: object, settlement: object) -> dict[str, str]:
    return {f"cons-{number}-time_min": str(t), f"cons-{number}-settlement_mm": str(settlement)}


# --- the grid on the page ------------------------------------------------------------------------


@pytest.mark.django_db
def test_the_grid_is_drawn_for_a_technician_with_a_label_and_units_for_every_cell(
    cast: Cast, ring: ShearStage
) -> None:
    page = _signed_in(cast, "technician").get(reverse("stage-detail", args=[ring.pk]))
    assert page.status_code == 200
    grid = _grid_of(page.content)
    shear = [n for n in grid.inputs if n.startswith("shear-")]
    cons = [n for n in grid.inputs if n.startswith("cons-")]
    assert len(shear) == 25 * 4 and len(cons) == 10 * 2
    assert "shear-25-force" in grid.inputs and "shear-26-force" not in grid.inputs
    for name, attrs in grid.inputs.items():
        assert attrs.get("aria-label"), name
    assert grid.inputs["shear-3-force"]["aria-label"] == (
        "Shear row 3: force reading, proving-ring divisions"
    )
    assert (
        "settlement, mm, compression positive" in grid.inputs["cons-1-settlement_mm"]["aria-label"]
    )
    headers = [h.strip() for h in grid.headers]
    for heading in (
        "Time (min)",
        "Settlement dial (mm, compression +)",
        "Horizontal displacement (mm)",
        "Vertical displacement (mm, dilation +)",
        "Force reading (divisions)",
        "Force (N)",
        "τ on nominal area (kPa)",
    ):
        assert heading in headers
    assert "vertical = −settlement" in page.content.decode()
    assert "1.52 N per division" in page.content.decode()


@pytest.mark.django_db
def test_a_load_cell_stage_asks_for_the_force_in_newtons(cast: Cast, load_cell: ShearStage) -> None:
    page = _signed_in(cast, "manager").get(reverse("stage-detail", args=[load_cell.pk]))
    headers = [h.strip() for h in _grid_of(page.content).headers]
    assert "Force reading (N)" in headers
    assert "Force reading (divisions)" not in headers


@pytest.mark.django_db
@pytest.mark.parametrize(
    ("persona", "status"),
    [("checker", 200), ("approver", 200), ("client_a", 404), ("client_b", 404)],
)
def test_the_grid_is_absent_for_checkers_and_clients(
    cast: Cast, ring: ShearStage, persona: str, status: int
) -> None:
    """Checkers see the stage page without the grid; clients do not see the staff page at all."""
    page = _signed_in(cast, persona).get(reverse("stage-detail", args=[ring.pk]))
    assert page.status_code == status
    assert b"entry-grid" not in page.content
    assert not _grid_of(page.content).inputs


# --- saving --------------------------------------------------------------------------------------


@pytest.mark.django_db
def test_posting_the_grid_saves_both_phases_and_ignores_empty_rows(
    cast: Cast, ring: ShearStage
) -> None:
    data = {
        **_cons(1, 0, 0),
        **_cons(2, 0.25, 0.041),
        **_cons(4, 1, "0.087"),  # row 3 left empty
        **_cons(5, 4, "0.125 mm"),
        **_shear(1, 0, 0, 0, 0),
        **_shear(2, 0.5, 0.25, -0.004, 31),
        **_shear(5, 1.0, 0.5, 0.012, 58.5),  # rows 3 and 4 left empty
        "shear-6-time_min": "  ",
    }
    response = _signed_in(cast, "technician").post(reverse("stage-enter", args=[ring.pk]), data)
    assert response.status_code == 302
    cons = list(
        ConsolidationReading.objects.filter(stage=ring)
        .order_by("elapsed_min")
        .values_list("elapsed_min", "settlement_mm")
    )
    # The dial's settlement (compression +) comes back as typed: the grid sends vertical =
    # −settlement (upward +) and the store keeps settlement = −vertical (common practice).
    assert cons == [(0.0, 0.0), (0.25, 0.041), (1.0, 0.087), (4.0, 0.125)]
    shear = [
        (r.elapsed_min, r.horizontal_mm, r.vertical_mm, r.force_reading)
        for r in shear_columns(ring.pk).rows()
    ]
    # Vertical upward positive (dilation +); proving-ring divisions stored raw.
    assert shear == [(0.0, 0.0, 0.0, 0.0), (0.5, 0.25, -0.004, 31.0), (1.0, 0.5, 0.012, 58.5)]


def test_the_settlement_sign_turns_over_and_text_goes_on_for_the_checks() -> None:
    # vertical = −settlement (compression positive, upward positive: common practice).
    assert upward_from_settlement("0.125") == -0.125
    assert upward_from_settlement("0.125 mm") == -0.125
    assert upward_from_settlement("-0.010") == 0.010
    assert upward_from_settlement("o.1") == "o.1"


@pytest.mark.django_db
def test_a_rejected_grid_is_drawn_again_as_typed_with_each_bad_row_marked(
    cast: Cast, ring: ShearStage
) -> None:
    data = {
        **_cons(1, 0, 0),
        **_cons(2, -1, 0.02),
        **_shear(1, 0, 0, 0, 0),
        **_shear(2, 0.5, 0.25, 0.001, 30),
        **_shear(3, 1.0, 0.5, 0.002, "n/a"),
        **_shear(4, 0.5, 0.75, 0.003, 61),  # same time as shear row 2
    }
    response = _signed_in(cast, "technician").post(reverse("stage-enter", args=[ring.pk]), data)
    assert response.status_code == 400
    assert shear_reading_count(ring.pk) == 0
    assert ConsolidationReading.objects.filter(stage=ring).count() == 0
    grid = _grid_of(response.content)
    for name, value in data.items():
        assert grid.inputs[name].get("value", "") == value, name
    assert sorted(grid.bad_rows) == ["2", "3", "4"]  # cons 2; shear 3 and 4
    assert grid.inputs["shear-3-force"].get("aria-invalid") == "true"
    assert grid.inputs["shear-3-force"]["aria-describedby"] == "shear-3-problem"
    assert grid.inputs["cons-2-time_min"].get("aria-invalid") == "true"
    assert "aria-invalid" not in grid.inputs["shear-3-time_min"]
    text = response.content.decode()
    assert "nothing was saved" in text
    assert "Shear row 3" in text and "Consolidation row 2" in text
    # The service's "row n" is said in grid terms.
    assert "same time as shear row 2" in text


@pytest.mark.django_db
def test_an_empty_grid_is_refused_without_saving(cast: Cast, ring: ShearStage) -> None:
    response = _signed_in(cast, "technician").post(
        reverse("stage-enter", args=[ring.pk]), {"shear-1-time_min": ""}
    )
    assert response.status_code == 400
    assert b"Type at least one reading" in response.content
    assert shear_reading_count(ring.pk) == 0


@pytest.mark.django_db
def test_add_rows_and_show_values_redraw_the_grid_without_saving(
    cast: Cast, ring: ShearStage
) -> None:
    client = _signed_in(cast, "technician")
    url = reverse("stage-enter", args=[ring.pk])
    more = client.post(url, {**_shear(1, 0, 0, 0, 40), "more": "shear"})
    assert more.status_code == 200
    grid = _grid_of(more.content)
    assert "shear-35-force" in grid.inputs and "shear-36-force" not in grid.inputs
    assert grid.inputs["shear-1-force"]["value"] == "40"
    checked = client.post(url, {**_shear(1, 0, 0, 0, 40), "check": "1"})
    assert checked.status_code == 200
    # BS 1377-7 / ASTM D3080 reduction of readings: 40 div × 1.52 N/div = 60.8 N;
    # τ = 1000 × 60.8 N / 3600 mm² = 16.9 kPa (one decimal as drawn).
    assert ">60.8<" in checked.content.decode()
    assert ">16.9<" in checked.content.decode()
    assert shear_reading_count(ring.pk) == 0


# --- the reduce endpoint -------------------------------------------------------------------------


@pytest.mark.django_db
def test_the_reduce_endpoint_gives_force_and_stress_per_grid_row(
    cast: Cast, ring: ShearStage
) -> None:
    data = {
        **_cons(1, 0, 0.01),
        **_shear(1, 0, 0, 0, 0),
        **_shear(2, 0.5, 0.25, 0.001, ""),  # no force typed yet: no values
        **_shear(3, 1.0, 0.5, 0.002, 40),
        **_shear(7, 3.0, 1.5, 0.004, 97.5),
        **_shear(8, 3.5, 1.75, 0.005, "9x"),
    }
    response = _signed_in(cast, "technician").post(
        reverse("stage-enter-reduce", args=[ring.pk]), data
    )
    assert response.status_code == 200
    assert response["Content-Type"] == "application/json"
    rows = {r["row"]: r for r in response.json()["rows"]}
    assert sorted(rows) == [1, 3, 7, 8]
    for number, divisions in ((1, 0.0), (3, 40.0), (7, 97.5)):
        # BS 1377-7 / ASTM D3080 reduction of readings: F = divisions × ring constant,
        # τ = 1000 · F / A (N/mm² → kPa) on the nominal area.
        force_n = divisions * RING_CONSTANT_N_PER_DIV
        assert rows[number]["force_n"] == pytest.approx(force_n, rel=1e-12)
        assert rows[number]["shear_stress_kpa"] == pytest.approx(
            1000.0 * force_n / BOX_AREA_MM2, rel=1e-12
        )
        assert rows[number]["note"] == ""
    assert rows[7]["force_n"] == pytest.approx(148.2, rel=1e-12)  # 97.5 × 1.52 by hand
    assert rows[8]["force_n"] is None and rows[8]["shear_stress_kpa"] is None
    assert rows[8]["note"]
    assert shear_reading_count(ring.pk) == 0


@pytest.mark.django_db
def test_the_reduce_endpoint_uses_newtons_as_typed_on_a_load_cell_stage(
    cast: Cast, load_cell: ShearStage
) -> None:
    response = _signed_in(cast, "technician").post(
        reverse("stage-enter-reduce", args=[load_cell.pk]), _shear(1, 0, 0, 0, "250.5")
    )
    (row,) = response.json()["rows"]
    # Factor 1 N/N, zero 0: F = reading; τ = 1000 · F / A (BS 1377-7 / ASTM D3080).
    assert row["force_n"] == pytest.approx(250.5)
    assert row["shear_stress_kpa"] == pytest.approx(1000.0 * 250.5 / BOX_AREA_MM2)
    assert math.isclose(row["shear_stress_kpa"], 69.583333, rel_tol=1e-6)  # by hand


@pytest.mark.django_db
@pytest.mark.parametrize(
    ("persona", "expected"),
    [("checker", 403), ("approver", 403), ("client_a", 404), ("client_b", 404)],
)
def test_the_reduce_endpoint_is_for_technicians_and_the_manager_only(
    cast: Cast, ring: ShearStage, persona: str, expected: int
) -> None:
    url = reverse("stage-enter-reduce", args=[ring.pk])
    response = _signed_in(cast, persona).post(url, _shear(1, 0, 0, 0, 40))
    assert response.status_code == expected
    assert b"force_n" not in response.content


@pytest.mark.django_db
def test_the_reduce_endpoint_answers_404_for_a_missing_stage_and_sends_strangers_to_sign_in(
    cast: Cast, ring: ShearStage
) -> None:
    missing = reverse("stage-enter-reduce", args=[ring.pk + 1000])
    assert _signed_in(cast, "technician").post(missing, {}).status_code == 404
    url = reverse("stage-enter-reduce", args=[ring.pk])
    assert Client().post(url, _shear(1, 0, 0, 0, 40)).status_code == 302
    assert _signed_in(cast, "manager").post(url, _shear(1, 0, 0, 0, 40)).status_code == 200
    assert _signed_in(cast, "technician").get(url).status_code == 405


@pytest.mark.django_db
def test_the_reduce_endpoint_needs_the_csrf_token(cast: Cast, ring: ShearStage) -> None:
    client = _signed_in(cast, "technician", enforce_csrf_checks=True)
    url = reverse("stage-enter-reduce", args=[ring.pk])
    assert client.post(url, _shear(1, 0, 0, 0, 40)).status_code == 403
    client.get(reverse("stage-detail", args=[ring.pk]))
    token = client.cookies["csrftoken"].value
    allowed = client.post(url, {**_shear(1, 0, 0, 0, 40), "csrfmiddlewaretoken": token})
    assert allowed.status_code == 200
    assert allowed.json()["rows"][0]["force_n"] == pytest.approx(40 * RING_CONSTANT_N_PER_DIV)


# --- traverses -----------------------------------------------------------------------------------


@pytest.mark.django_db
def test_a_second_traverse_is_entered_without_touching_the_first(
    cast: Cast, ring: ShearStage
) -> None:
    """A residual test by reversal shears the same specimen several times; each traverse is typed
    on its own and saving one keeps the others. The audit row's digest after the change is the
    digest of what the tables then hold."""
    from testing.models import ReadingsChange
    from testing.services.readings_audit import readings_state

    ShearStage.objects.filter(pk=ring.pk).update(traverses=3)
    technician = _signed_in(cast, "technician")
    url = reverse("stage-enter", args=[ring.pk])
    page = technician.get(reverse("stage-detail", args=[ring.pk]))
    assert b"3 traverses, entered one at a time" in page.content
    assert all(f'<option value="{n}"'.encode() in page.content for n in (1, 2, 3))
    first = {"traverse": "1", **_shear(1, 0, 0, 0, 0), **_shear(2, 1.0, 0.5, 0.01, 40)}
    second = {"traverse": "2", **_shear(1, 0, 0, 0, 0), **_shear(2, 1.0, 0.4, -0.01, 25)}
    assert technician.post(url, first).status_code == 302
    assert technician.post(url, second).status_code == 302
    stored = [(r.traverse, r.horizontal_mm, r.force_reading) for r in shear_columns(ring.pk).rows()]
    assert stored == [(1, 0.0, 0.0), (1, 0.5, 40.0), (2, 0.0, 0.0), (2, 0.4, 25.0)]
    # Typing traverse 2 again replaces traverse 2 only.
    again = {"traverse": "2", **_shear(1, 0, 0, 0, 0), **_shear(2, 2.0, 0.9, -0.02, 27)}
    assert technician.post(url, again).status_code == 302
    replaced = [(r.traverse, r.horizontal_mm) for r in shear_columns(ring.pk).rows()]
    assert replaced == [(1, 0.0), (1, 0.5), (2, 0.0), (2, 0.9)]
    last = ReadingsChange.objects.filter(stage=ring).order_by("-id").first()
    assert last is not None
    assert (last.shear_rows_before, last.shear_rows_after) == (4, 4)
    assert last.sha256_after == readings_state(ring.pk).sha256


@pytest.mark.django_db
def test_a_traverse_the_stage_does_not_have_is_refused(cast: Cast, ring: ShearStage) -> None:
    from testing.services.imports import ReadingsRejected
    from testing.services.readings_entry import stage_readings_enter

    response = _signed_in(cast, "technician").post(
        reverse("stage-enter", args=[ring.pk]), {"traverse": "2", **_shear(1, 0, 0, 0, 0)}
    )
    assert response.status_code == 400  # the stage has one traverse
    assert shear_reading_count(ring.pk) == 0
    # The service refuses it too, for any caller of the grid's save.
    with pytest.raises(ReadingsRejected) as refused:
        stage_readings_enter(
            user=cast.technician,
            stage=ring,
            rows=[{"phase": "shear", "traverse": 2, "time_min": 0, "horizontal_mm": 0,
                   "vertical_mm": 0, "force": 0}],
        )  # fmt: skip
    assert [(e.row, e.column) for e in refused.value.errors] == [(1, "traverse")]
    assert "1 traverse" in refused.value.errors[0].reason
    assert shear_reading_count(ring.pk) == 0
