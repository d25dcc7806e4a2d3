"""Seed a fresh database with one issued report, for the restore-drill test (run as a script).

Uses the same builders as the report tests; tasks run in-process (no REDIS_URL), so each
on-commit task runs as soon as its transaction commits.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")

import django

django.setup()

from reports import services  # noqa: E402
from testing.models import Organisation, Role  # noqa: E402
from testing.services import computation  # noqa: E402
from testing.services.accounts import lab_user_create  # noqa: E402
from tests.conftest import PASSWORD, Cast, make_records  # noqa: E402
from tests.reports.conftest import build_test_set  # noqa: E402


def main() -> None:
    org_a = Organisation.objects.create(name="Fenwick Brae Consulting Engineers", code="fenwick")
    org_b = Organisation.objects.create(name="Saltcoats Quay Developments", code="saltcoats")
    former = lab_user_create(username="former", password=PASSWORD, roles=[Role.TECHNICIAN])
    cast = Cast(
        technician=lab_user_create(username="tech", password=PASSWORD, roles=[Role.TECHNICIAN]),
        checker=lab_user_create(username="checker", password=PASSWORD, roles=[Role.CHECKER]),
        approver=lab_user_create(username="approver", password=PASSWORD, roles=[Role.APPROVER]),
        manager=lab_user_create(username="manager", password=PASSWORD, roles=[Role.MANAGER]),
        client_a=lab_user_create(
            username="client-a", password=PASSWORD, roles=[Role.CLIENT], organisation=org_a
        ),
        client_b=lab_user_create(
            username="client-b", password=PASSWORD, roles=[Role.CLIENT], organisation=org_b
        ),
        deactivated=former,
        org_a=org_a,
        org_b=org_b,
    )
    records = make_records(cast, org_a, "TL-2026-014")
    test = build_test_set(user=cast.technician, project=records.project, sample=records.sample)
    for _ in range(4):
        computation.test_recompute_request(test=test, user=cast.technician, reason="drill seed")
        if test.envelopes.exists():
            break
    draft = services.report_create(user=cast.technician, project=records.project, tests=[test])
    services.revision_check(user=cast.checker, revision=draft, password=PASSWORD)
    services.revision_approve(user=cast.approver, revision=draft, password=PASSWORD)
    services.revision_issue(user=cast.approver, revision=draft, password=PASSWORD)
    draft.refresh_from_db()
    assert draft.state == "issued", draft.state
    print(f"seeded {draft.label} revision id {draft.pk} pdf {draft.pdf.name}")


if __name__ == "__main__":
    main()
