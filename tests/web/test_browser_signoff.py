"""Sign-off in a real browser (Debian's Chromium through Playwright, headless, live server).

A technician drafts a report and the checker checks it; the approving engineer approves the demo's
DS-02 report and issues it, each time typing the password the page asks for again (a wrong one is
refused and changes nothing); the page shows that the signed PDF is being prepared until it is
issued; then the client downloads the PDF from the portal and it verifies as this laboratory's
current, intact revision. Screenshots (``signoff-*.png``) go to ``var/screenshots/``.
"""

from __future__ import annotations

import hashlib
from pathlib import Path
from typing import Any

import pytest

from reports import tasks
from reports.models import AuditEvent, Report, ReportRevision, RevisionState, SignOff
from reports.verification import verify_pdf_bytes
from testing.models import DirectShearTest, Project
from tests.web.test_browser import (  # noqa: F401  (shared demo and sign-in fixtures)
    Session,
    demo,
    session,
)

expect = pytest.importorskip("playwright.sync_api").expect
pytestmark = [pytest.mark.browser, pytest.mark.timeout(300)]

PASSWORD = "browser-demo-pass"  # the demo password the shared ``demo`` fixture sets
REFUSED = "Re-enter your password to sign. Nothing was signed."


@pytest.fixture(autouse=True)
def _media(settings: Any, tmp_path: Path) -> None:
    """Issued PDFs (the demo's and this test's) are written under the test's own folder.

    Autouse fixtures are set up before the ``demo`` fixture, which issues the demo's reports."""
    settings.MEDIA_ROOT = str(tmp_path / "media")


class _HeldQueue:
    """The report queue with its worker busy: issuing hands the render task over and it waits here
    until the test releases it, then the real task runs (render, sign, store)."""

    def __init__(self, task: Any) -> None:
        self.task = task
        self.held: list[int] = []

    def delay(self, revision_id: int) -> None:
        self.held.append(revision_id)

    def release(self) -> list[str]:
        done = [str(self.task.apply(args=(rid,)).get()) for rid in self.held]
        self.held.clear()
        return done


def _state(s: Session) -> Any:
    return s.page.locator("tr:has(th:text-is('State')) td")


def _sign(s: Session, button: str, password: str) -> None:
    """Type the password into the form that holds the sign button, and press the button."""
    form = s.page.locator("form", has=s.page.get_by_role("button", name=button))
    form.get_by_label("Password").fill(password)
    form.get_by_role("button", name=button).click()
    s.page.wait_for_load_state()


def _refusals(revision: ReportRevision) -> int:
    return AuditEvent.objects.filter(
        subject=f"revision:{revision.pk}", action="signature_refused"
    ).count()


def test_a_technician_drafts_a_report_and_the_checker_checks_it(
    session: Any,  # noqa: F811  (the shared fixture)
) -> None:
    logger_set = DirectShearTest.objects.get(reference="DS-03")
    before = set(Report.objects.values_list("pk", flat=True))

    tech = session()
    tech.sign_in("technician")
    tech.go(f"/reports/new/?project={logger_set.project_id}")
    tech.page.get_by_label("DS-03", exact=False).check()
    tech.page.get_by_role("button", name="Create draft").click()
    tech.page.wait_for_url("**/reports/revisions/*/")
    expect(_state(tech)).to_have_text("Draft")
    (report,) = Report.objects.exclude(pk__in=before)
    draft = report.revisions.get()
    assert list(report.tests.values_list("reference", flat=True)) == ["DS-03"]
    assert draft.state == RevisionState.DRAFT and draft.prepared_by.username == "technician"

    checker = session()
    checker.sign_in("checker")
    checker.go(f"/reports/revisions/{draft.pk}/")
    _sign(checker, "Sign: checked", "not-my-password")
    expect(checker.page.get_by_text(REFUSED).first).to_be_visible()
    expect(_state(checker)).to_have_text("Draft")
    draft.refresh_from_db()
    assert draft.state == RevisionState.DRAFT and draft.checked_by is None
    assert not SignOff.objects.filter(revision=draft).exists()
    assert _refusals(draft) == 1

    _sign(checker, "Sign: checked", PASSWORD)
    expect(checker.page.get_by_text("Signed: checked.").first).to_be_visible()
    expect(_state(checker)).to_have_text("Checked")
    draft.refresh_from_db()
    assert draft.state == RevisionState.CHECKED and draft.checked_by is not None
    assert draft.checked_by.username == "checker"
    (signoff,) = SignOff.objects.filter(revision=draft)
    assert signoff.meaning == "checked" and signoff.content_sha256 == draft.content_sha256
    # The sign-off table names the checker and the content hash they signed.
    row = checker.page.locator("tr", has_text=signoff.printed_name)
    expect(row).to_contain_text(draft.content_sha256)
    checker.shot("signoff-checked")
    assert checker.errors == [] and tech.errors == []


def test_the_engineer_approves_and_issues_ds02_and_the_client_downloads_the_signed_pdf(
    session: Any,  # noqa: F811  (the shared fixture)
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    clay = DirectShearTest.objects.get(reference="DS-02")
    revision = ReportRevision.objects.get(report__tests=clay, state=RevisionState.CHECKED)
    assert clay.released_at is None

    # Who may approve and issue (reports/services.py): an approving engineer who neither prepared
    # the data or the report nor checked it — the demo's "engineer".
    eng = session()
    eng.sign_in("engineer")
    eng.go(f"/reports/revisions/{revision.pk}/")
    expect(_state(eng)).to_have_text("Checked")
    eng.page.wait_for_selector(".plot .main-svg")
    eng.shot("signoff-before-approval")

    _sign(eng, "Sign: approved", "wrong-password")
    expect(eng.page.get_by_text(REFUSED).first).to_be_visible()
    expect(_state(eng)).to_have_text("Checked")
    revision.refresh_from_db()
    assert revision.state == RevisionState.CHECKED and revision.approved_by is None
    assert not SignOff.objects.filter(revision=revision, meaning="approved").exists()
    assert _refusals(revision) == 1
    eng.shot("signoff-refused")

    _sign(eng, "Sign: approved", PASSWORD)
    expect(eng.page.get_by_text("Signed: approved.").first).to_be_visible()
    expect(_state(eng)).to_have_text("Approved")
    revision.refresh_from_db()
    assert revision.state == RevisionState.APPROVED
    assert revision.approved_by is not None and revision.approved_by.username == "engineer"

    # A wrong password at issue is refused too, and nothing is queued.
    queue = _HeldQueue(tasks.render_revision)
    monkeypatch.setattr(tasks, "render_revision", queue)
    _sign(eng, "Sign and issue", "wrong-password")
    expect(eng.page.get_by_text(REFUSED).first).to_be_visible()
    expect(_state(eng)).to_have_text("Approved")
    assert queue.held == []
    assert _refusals(revision) == 2

    _sign(eng, "Sign and issue", PASSWORD)
    expect(eng.page.get_by_text("Issued: the signed PDF is being prepared.").first).to_be_visible()
    expect(_state(eng)).to_have_text("Being issued")
    expect(eng.page.get_by_role("status").filter(has_text="being rendered")).to_be_visible()
    assert queue.held == [revision.pk]
    revision.refresh_from_db()
    assert revision.state == RevisionState.ISSUING and not revision.pdf
    eng.shot("signoff-issuing")

    assert queue.release() == ["issued"]
    # The page checks again by itself while the PDF is prepared: wait for it, bounded.
    expect(_state(eng)).to_have_text("Issued", timeout=60_000)
    revision.refresh_from_db()
    assert revision.state == RevisionState.ISSUED and revision.pdf_sha256
    pdf_row = eng.page.get_by_role("row", name="PDF sha256")
    expect(pdf_row).to_contain_text(revision.pdf_sha256)
    expect(pdf_row.get_by_role("link", name="Download PDF")).to_be_visible()
    assert set(revision.signoffs.values_list("meaning", flat=True)) == {
        "checked",
        "approved",
        "issued",
    }
    eng.shot("signoff-issued")
    assert eng.errors == []

    # The client of the organisation that owns DS-02 downloads the new PDF from the portal.
    client = session()
    client.sign_in("client-a")
    client.go("/portal/")
    link = client.page.get_by_role("link", name=f"Download the signed PDF of {revision.label}")
    expect(link).to_be_visible()
    row = client.page.get_by_role("row").filter(has=link)
    expect(row).to_contain_text("Current")
    expect(row).to_contain_text("Signature intact")
    client.shot("signoff-portal")
    with client.page.expect_download() as info:
        link.click()
    download = info.value
    assert download.suggested_filename == f"{revision.report.number}-rev{revision.number}.pdf"
    data = Path(download.path()).read_bytes()
    assert data.startswith(b"%PDF-")
    # FIPS 180-4 sha256 (hashlib) of the bytes as downloaded, against the hash stored at issue.
    assert hashlib.sha256(data).hexdigest() == revision.pdf_sha256
    check = verify_pdf_bytes(data)
    assert check.authentic, check.message
    assert check.status == "current"
    assert check.revision is not None and check.revision.pk == revision.pk
    clay.refresh_from_db()
    assert clay.released_at is not None  # the issued report released the set to the client
    assert client.errors == []

    # Not-found for another organisation's portal pages, either way round.
    theirs = Project.objects.get(organisation__name="Saltcoats Quay Developments")
    response = client.go(f"/portal/projects/{theirs.pk}/")
    assert response.status == 404
    expect(client.page.get_by_role("heading", name="Nothing here")).to_be_visible()

    other = session()
    other.sign_in("client-b")
    for path in (
        f"/portal/tests/{clay.pk}/",
        f"/portal/revisions/{revision.public_id}/",
        f"/portal/revisions/{revision.public_id}/pdf/",
        f"/portal/projects/{clay.project_id}/",
    ):
        response = other.go(path)
        assert response.status == 404, path
        expect(other.page.get_by_role("heading", name="Nothing here")).to_be_visible()
        assert revision.report.number not in other.page.content()
    other.shot("signoff-other-client-not-found")
