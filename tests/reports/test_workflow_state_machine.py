"""Random edit / check / approve / issue / supersede / withdraw by random roles (Hypothesis).

Invariants after every step: an issued PDF's bytes and hash never change; nothing is edited after
issue; preparer ≠ checker ≠ approver; at most one current issued revision per report.
"""

from __future__ import annotations

import hashlib
from typing import Any

import pytest
from django.contrib.auth.models import User
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from hypothesis.stateful import RuleBasedStateMachine, invariant, rule, run_state_machine_as_test

from reports import services
from reports.models import ReportRevision, SignOff
from reports.rendering import html as report_html
from testing.models import DirectShearTest
from testing.services.errors import ServiceError
from tests.conftest import PASSWORD, Cast, Records

ROLES = ("technician", "checker", "approver", "manager", "client_a")
MOSTLY = st.sampled_from([True, True, True, False])  # the right password, most of the time


def role_or_any(right: str) -> st.SearchStrategy[str]:
    """Half the time the role that may do it, otherwise anyone (so refusals are exercised too)."""
    return st.one_of(st.just(right), st.sampled_from(ROLES))


def test_workflow_state_machine(
    cast: Cast, records_a: Records, computed_set: DirectShearTest, monkeypatch: pytest.MonkeyPatch
) -> None:
    full = report_html.render_report_html
    # Charts cost time and are not what this test is about; the PDF is still real and signed.
    monkeypatch.setattr(
        report_html,
        "render_report_html",
        lambda revision, issuing=False, charts=True: full(revision, issuing=issuing, charts=False),
    )

    issued_count: list[int] = []

    class Workflow(RuleBasedStateMachine):
        def __init__(self) -> None:
            super().__init__()
            self.revision: ReportRevision | None = None
            self.issued_bytes: dict[int, tuple[str, str, bytes]] = {}

        def _user(self, role: str) -> User:
            return getattr(cast, role)  # type: ignore[no-any-return]

        def _current(self) -> ReportRevision:
            assert self.revision is not None
            self.revision = ReportRevision.objects.select_related("report").get(pk=self.revision.pk)
            return self.revision

        @rule(role=role_or_any("technician"))
        def create(self, role: str) -> None:
            if self.revision is not None:
                return
            try:
                self.revision = services.report_create(
                    user=self._user(role), project=records_a.project, tests=[computed_set]
                )
            except ServiceError:
                assert role not in ("technician", "manager")

        @rule(role=role_or_any("technician"), text=st.text(max_size=20))
        def edit(self, role: str, text: str) -> None:
            if self.revision is None:
                return
            before = self._current().state
            try:
                services.revision_update(
                    user=self._user(role), revision=self.revision, remarks=text
                )
            except ServiceError:
                return
            assert before == "draft"  # an edit succeeds only on a draft

        @rule(role=role_or_any("checker"), good=MOSTLY)
        def check(self, role: str, good: bool) -> None:
            if self.revision is None:
                return
            signed = SignOff.objects.count()
            try:
                services.revision_check(
                    user=self._user(role),
                    revision=self._current(),
                    password=PASSWORD if good else "nope",
                )
            except ServiceError:
                assert SignOff.objects.count() == signed
                return
            assert good and role == "checker"

        @rule(role=role_or_any("approver"), good=MOSTLY)
        def approve(self, role: str, good: bool) -> None:
            if self.revision is None:
                return
            try:
                services.revision_approve(
                    user=self._user(role),
                    revision=self._current(),
                    password=PASSWORD if good else "",
                )
            except ServiceError:
                return
            assert good and role == "approver"

        @rule(role=role_or_any("approver"), good=MOSTLY)
        def issue(self, role: str, good: bool) -> None:
            if self.revision is None:
                return
            try:
                services.revision_issue(
                    user=self._user(role),
                    revision=self._current(),
                    password=PASSWORD if good else None,
                )
            except ServiceError:
                return
            assert good and role == "approver"
            done = services.revision_issue_complete(revision_id=self.revision.pk)
            assert done is not None and done.state == "issued"
            issued_count.append(done.pk)
            with done.pdf.open("rb") as fh:
                self.issued_bytes[done.pk] = (done.pdf_sha256, done.content_sha256, fh.read())

        @rule(role=role_or_any("technician"))
        def supersede(self, role: str) -> None:
            if self.revision is None:
                return
            try:
                self.revision = services.revision_supersede(
                    user=self._user(role), revision=self._current(), reason="amended in test"
                )
            except ServiceError:
                return
            assert role in ("technician", "manager")

        @rule(role=st.sampled_from(ROLES), right=MOSTLY, good=MOSTLY)
        def advance(self, role: str, right: bool, good: bool) -> None:
            """The next step the current state allows, usually by the person who may take it."""
            if self.revision is None:
                self.create("technician" if right else role)
                return
            state = self._current().state
            if state == "draft":
                self.check("checker" if right else role, good)
            elif state == "checked":
                self.approve("approver" if right else role, good)
            elif state == "approved":
                self.issue("approver" if right else role, good)
            elif state == "issued":
                self.supersede("technician" if right else role)

        # The same rule twice more, so that correct next steps are drawn often enough to reach
        # issue and amendment within a short sequence.
        advance_again = rule(role=st.sampled_from(ROLES), right=MOSTLY, good=MOSTLY)(
            lambda self, role, right, good: self.advance(role, right, good)
        )
        advance_once_more = rule(role=st.sampled_from(ROLES), right=MOSTLY, good=MOSTLY)(
            lambda self, role, right, good: self.advance(role, right, good)
        )

        @invariant()
        def issued_never_change(self) -> None:
            for pk, (pdf_hash, content_hash, data) in self.issued_bytes.items():
                rev = ReportRevision.objects.get(pk=pk)
                assert rev.pdf_sha256 == pdf_hash and rev.content_sha256 == content_hash
                assert rev.state in ("issued", "superseded")
                with rev.pdf.open("rb") as fh:
                    stored = fh.read()
                assert stored == data and hashlib.sha256(stored).hexdigest() == pdf_hash

        @invariant()
        def duties_separated_and_one_current(self) -> None:
            for rev in ReportRevision.objects.all():
                people: list[Any] = [rev.prepared_by_id, rev.checked_by_id, rev.approved_by_id]
                named = [p for p in people if p is not None]
                assert len(named) == len(set(named))
            for report_id in ReportRevision.objects.values_list("report_id", flat=True).distinct():
                assert (
                    ReportRevision.objects.filter(report_id=report_id, state="issued").count() <= 1
                )

    run_state_machine_as_test(
        Workflow,
        settings=settings(
            max_examples=30,
            stateful_step_count=20,
            deadline=None,
            derandomize=True,
            database=None,
            suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
        ),
    )
    assert len(issued_count) >= 3, "the machine must reach issue to test what follows"
