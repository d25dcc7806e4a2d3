"""An amendment lists every printed value that changed between two revisions: the named items
(stresses, failure, density, c′, φ′ …) and every other value of the frozen content (descriptions,
client details, rates, flags, curves), while record ids, digests and float noise below the
fourth significant figure are not changes."""

from __future__ import annotations

import copy
from typing import Any

from reports.models import ReportRevision
from reports.rendering.context import content_changes


def _changed(old: dict[str, Any], new: dict[str, Any]) -> dict[str, tuple[str, str]]:
    return {item: (before, after) for item, before, after in content_changes(old, new)}


def test_unchanged_content_and_new_ids_are_not_changes(issued: ReportRevision) -> None:
    old = issued.content
    new = copy.deepcopy(old)
    new["revision"] = {"number": 2, "id": "another"}
    test = new["tests"][0]
    test["test_id"] += 100
    test["stages"][0]["stage_result_id"] += 100
    test["stages"][0]["inputs_sha256"] = "f" * 64
    test["stages"][0]["rate_measured_mm_per_min"] *= 1 + 1e-9  # float noise
    assert _changed(old, new) == {}


def test_every_other_printed_value_is_listed_once(issued: ReportRevision) -> None:
    old = issued.content
    new = copy.deepcopy(old)
    reference = new["tests"][0]["reference"]
    stage = new["tests"][0]["stages"][1]
    number = stage["stage_number"]
    stage["specimen"]["description"] = "Dense grey SAND."
    stage["rate_measured_mm_per_min"] *= 1.05
    stage["curves"]["shear_stress_kpa"][10] += 1.0
    new["client"]["contact_email"] = "other@example.invalid"
    envelope = new["tests"][0]["envelopes"][0]
    envelope["warnings"] = [*envelope["warnings"], {"code": "X", "severity": "warning"}]
    changed = _changed(old, new)
    where = f"{reference} stage {number}"
    assert changed[f"{where}: specimen description"][1] == "Dense grey SAND."
    assert f"{where}: rate measured mm per min" in changed
    assert [k for k in changed if "curves" in k] == [f"{where}: curves shear stress kpa"]
    assert changed["Report: client contact email"] == (
        old["client"]["contact_email"],
        "other@example.invalid",
    )
    assert any(k.startswith(f"{reference} peak envelope: warnings") for k in changed)
    assert len(changed) == 4 + sum(
        k.startswith(f"{reference} peak envelope: warnings") for k in changed
    )


def test_the_named_items_keep_their_printed_form(issued: ReportRevision) -> None:
    old = issued.content
    new = copy.deepcopy(old)
    stage = new["tests"][0]["stages"][0]
    stage["failure"]["shear_stress_kpa"] += 2.0
    changed = _changed(old, new)
    key = f"{new['tests'][0]['reference']} stage {stage['stage_number']}: shear stress at failure"
    assert changed[key][1].endswith(" kPa")
    assert len(changed) == 1  # not listed a second time under its raw name
