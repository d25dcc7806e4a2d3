"""Writes for reports: create, edit, check, approve, issue, supersede, withdraw.

Each sign-off asks for the password again and is bound to the hash of exactly what was signed.
State moves are conditional updates (``filter(state=...).update(...)``), so two people acting on
the same revision at once leave one result and the other gets :class:`Conflict`.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from datetime import datetime, timedelta
from typing import TYPE_CHECKING, Any

from django.conf import settings
from django.contrib.auth.models import User
from django.core.files.base import ContentFile
from django.db import IntegrityError, transaction
from django.db.models import Q
from django.utils import timezone

from labsite.security.lockout import lock_words, password_failure_record, password_lock
from reports.audit import actor_name, audit_record
from reports.models import (
    Report,
    ReportRevision,
    RevisionChange,
    RevisionState,
    SigningCertificate,
    SignOff,
    SignOffMeaning,
)
from reports.rendering.context import (
    build_content,
    content_changes,
    content_sha256,
    report_tests_load,
)
from testing import access
from testing.models import DirectShearTest, Project
from testing.services.errors import NotAllowed, ServiceError
from testing.services.release import test_mark_released

if TYPE_CHECKING:
    from reports.signing import CertificateInfo

logger = logging.getLogger(__name__)


class Conflict(ServiceError):
    """Someone else changed the revision first; nothing was done (HTTP 409)."""


class SignatureRefused(ServiceError):
    """The password was missing or wrong; nothing was signed and the attempt is on record."""


def _subject(revision: ReportRevision) -> str:
    return f"revision:{revision.pk}"


def _role_label(user: User, meaning: str) -> str:
    profile = access.profile_of(user)
    if meaning == SignOffMeaning.CHECKED:
        return "Checker"
    if profile is not None and profile.is_approver:
        return "Approving engineer"
    return "Lab manager"


# Wrong sign-off passwords count against the same limit as failed sign-ins (django-axes): each is
# recorded as an axes access attempt under the user name, with no address and this user agent, so
# axes' per-user lockout of the sign-in page counts them too, and the same lock refuses signing.
def _require_password(
    *, user: User, password: str | None, revision: ReportRevision, meaning: str
) -> None:
    """Re-authenticate the signer. A failed attempt is written to the audit trail and refused.

    A wrong password counts as a failed sign-in: after as many failures as lock sign-in (wrong
    sign-in and sign-off passwords together, within the cool-off period), signing is refused even
    with the right password, and signing in is locked too. A missing password guesses nothing and
    is not counted. Success resets nothing: only a successful sign-in does that.
    """
    from axes.conf import settings as axes_settings

    username = user.get_username()
    now = timezone.now()
    locked, until = password_lock(username, now)
    if locked:
        # As axes does for a sign-in refused while locked: on record, and by default it extends
        # the lock.
        if password and axes_settings.AXES_RESET_COOL_OFF_ON_FAILURE_DURING_LOCKOUT:
            password_failure_record(username, now, locked=True)
            until = password_lock(username, now)[1]
        audit_record(
            actor=user,
            action="signature_refused",
            subject=_subject(revision),
            new=meaning,
            reason=f"locked after too many wrong passwords, {lock_words(until)}",
        )
        raise SignatureRefused(
            "Too many wrong passwords: signing (and signing in) is locked "
            f"{lock_words(until)}. Nothing was signed."
        )
    if password and user.is_active and user.check_password(password):
        return
    message = "Re-enter your password to sign. Nothing was signed."
    if password:
        password_failure_record(username, now, locked=False)
        locked, until = password_lock(username, now)
        if locked:
            message = (
                "Wrong password, too many times: signing (and signing in) is now locked "
                f"{lock_words(until)}. Nothing was signed."
            )
    audit_record(
        actor=user,
        action="signature_refused",
        subject=_subject(revision),
        new=meaning,
        reason="password missing" if not password else "wrong password",
    )
    raise SignatureRefused(message)


def _can_prepare(user: User) -> bool:
    return access.can_enter_readings(user) or access.can_manage(user)


# --- Creating and editing ------------------------------------------------------------------


def _next_report_number(project: Project, now: datetime) -> str:
    seq = Report.objects.filter(created_at__year=now.year).count() + 1
    return settings.TAULINE_REPORT_NUMBER_PATTERN.format(
        year=now.year, seq=seq, project=project.reference
    )


def report_create(
    *,
    user: User,
    project: Project,
    tests: Sequence[DirectShearTest],
    title: str = "Direct shear test report",
    remarks: str = "",
    deviations: str = "",
) -> ReportRevision:
    """A new numbered report and its first (draft) revision, freezing the latest results."""
    if not _can_prepare(user):
        raise NotAllowed("Only technicians and the lab manager prepare reports.")
    if not tests:
        raise ServiceError("Choose at least one test set for the report.")
    if any(t.project_id != project.pk for t in tests):
        raise ServiceError("Every test set in a report must belong to the report's project.")
    loaded = report_tests_load([t.pk for t in tests])
    now = timezone.now()
    for attempt in range(5):
        try:
            with transaction.atomic():
                number = _next_report_number(project, now)
                if attempt:
                    number = f"{number}-{attempt}"
                report = Report.objects.create(number=number, project=project, created_by=user)
                report.tests.set(loaded)
                revision = _revision_new(
                    user=user,
                    report=report,
                    number=1,
                    tests=loaded,
                    title=title,
                    remarks=remarks,
                    deviations=deviations,
                )
                audit_record(
                    actor=user, action="report_created", subject=f"report:{report.pk}", new=number
                )
                return revision
        except IntegrityError:
            if attempt == 4:
                raise
    raise AssertionError("unreachable")


def _revision_new(
    *,
    user: User,
    report: Report,
    number: int,
    tests: Sequence[DirectShearTest],
    title: str,
    remarks: str,
    deviations: str,
    replaces: ReportRevision | None = None,
    amendment_reason: str = "",
) -> ReportRevision:
    revision = ReportRevision(
        report=report,
        number=number,
        title=title,
        remarks=remarks,
        deviations=deviations,
        prepared_by=user,
        replaces=replaces,
        amendment_reason=amendment_reason,
    )
    _freeze(revision, tests)
    revision.save()
    revision.stage_results.set(revision._frozen_stage_ids)  # type: ignore[attr-defined]
    revision.envelope_results.set(revision._frozen_envelope_ids)  # type: ignore[attr-defined]
    audit_record(
        actor=user,
        action="revision_created",
        subject=_subject(revision),
        new={
            "report": report.number,
            "revision": number,
            "content_sha256": revision.content_sha256,
        },
        reason=amendment_reason,
    )
    return revision


def _freeze(revision: ReportRevision, tests: Sequence[DirectShearTest]) -> None:
    replaces = None
    if revision.replaces is not None:
        replaces = {
            "id": str(revision.replaces.public_id),
            "label": revision.replaces.label,
            "reason": revision.amendment_reason,
        }
    content, stage_ids, envelope_ids = build_content(
        tests=tests,
        report_number=revision.report.number,
        revision_number=revision.number,
        revision_id=str(revision.public_id),
        title=revision.title,
        remarks=revision.remarks,
        deviations=revision.deviations,
        replaces=replaces,
    )
    if revision.replaces is not None:
        content["changes"] = [
            {"item": item, "old": old, "new": new, "reason": revision.amendment_reason}
            for item, old, new in content_changes(revision.replaces.content, content)
        ]
    revision.content = content
    revision.content_sha256 = content_sha256(content)
    revision._frozen_stage_ids = stage_ids  # type: ignore[attr-defined]
    revision._frozen_envelope_ids = envelope_ids  # type: ignore[attr-defined]


def _sync_changes(revision: ReportRevision) -> None:
    RevisionChange.objects.filter(revision=revision).delete()
    RevisionChange.objects.bulk_create(
        RevisionChange(
            revision=revision,
            item=c["item"],
            old_value=c["old"],
            new_value=c["new"],
            reason=c["reason"],
        )
        for c in revision.content.get("changes", [])
    )


def revision_update(
    *,
    user: User,
    revision: ReportRevision,
    title: str | None = None,
    remarks: str | None = None,
    deviations: str | None = None,
    refresh_results: bool = False,
    reason: str = "",
) -> ReportRevision:
    """Edit a draft's text or re-freeze the latest results. Only drafts can change."""
    if not _can_prepare(user):
        raise NotAllowed("Only technicians and the lab manager edit reports.")
    with transaction.atomic():
        locked = (
            ReportRevision.objects.select_for_update(of=("self",))
            .select_related("report", "replaces")
            .get(pk=revision.pk)
        )
        if locked.state != RevisionState.DRAFT:
            raise Conflict(
                f"{locked.label} is {locked.get_state_display().lower()}; only a draft can be edited."
            )
        changed: dict[str, tuple[Any, Any]] = {}
        for name, value in (("title", title), ("remarks", remarks), ("deviations", deviations)):
            if value is not None and value != getattr(locked, name):
                changed[name] = (getattr(locked, name), value)
                setattr(locked, name, value)
        if not changed and not refresh_results:
            return locked
        old_hash = locked.content_sha256
        _freeze(locked, report_tests_load(locked.report.tests.values_list("pk", flat=True)))
        locked.save()
        locked.stage_results.set(locked._frozen_stage_ids)  # type: ignore[attr-defined]
        locked.envelope_results.set(locked._frozen_envelope_ids)  # type: ignore[attr-defined]
        _sync_changes(locked)
        for name, (old, new) in changed.items():
            audit_record(
                actor=user,
                action="revision_edited",
                subject=_subject(locked),
                field=name,
                old=old,
                new=new,
                reason=reason,
            )
        audit_record(
            actor=user,
            action="revision_content_frozen",
            subject=_subject(locked),
            field="content_sha256",
            old=old_hash,
            new=locked.content_sha256,
            reason=reason,
        )
    return locked


# --- Sign-offs -----------------------------------------------------------------------------


def _sign(
    *,
    user: User,
    revision: ReportRevision,
    password: str | None,
    meaning: str,
    from_state: str,
    to_state: str,
    by_field: str,
    expected_content_sha256: str | None,
) -> ReportRevision:
    _require_password(user=user, password=password, revision=revision, meaning=meaning)
    now = timezone.now()
    with transaction.atomic():
        filters: dict[str, Any] = {"pk": revision.pk, "state": from_state}
        if expected_content_sha256:
            filters["content_sha256"] = expected_content_sha256
        moved = ReportRevision.objects.filter(**filters).update(state=to_state, **{by_field: user})
        if moved != 1:
            current = ReportRevision.objects.get(pk=revision.pk)
            raise Conflict(
                f"{current.label} is now {current.get_state_display().lower()}"
                + (
                    " and its content changed since you opened it"
                    if expected_content_sha256 and current.content_sha256 != expected_content_sha256
                    else ""
                )
                + f"; it cannot be marked {meaning}."
            )
        current = ReportRevision.objects.select_related("report").get(pk=revision.pk)
        SignOff.objects.create(
            revision=current,
            meaning=meaning,
            user=user,
            printed_name=actor_name(user),
            role=_role_label(user, meaning),
            signed_at=now,
            content_sha256=current.content_sha256,
        )
        audit_record(
            actor=user,
            action=f"revision_{meaning}",
            subject=_subject(current),
            field="state",
            old=from_state,
            new=to_state,
        )
    return current


def _data_preparers(revision: ReportRevision) -> set[int]:
    ids = {revision.prepared_by_id}
    ids.update(revision.report.tests.values_list("created_by_id", flat=True))
    return ids


def sign_refusal(user: User, revision: ReportRevision, meaning: str) -> str:
    """Why ``user`` may not sign ``revision`` with ``meaning`` ("" when they may): the separation
    of duties, as the sign-off services enforce it and the pages show it."""
    if meaning == SignOffMeaning.CHECKED:
        if not access.can_check(user):
            return "Only a checker can check a report."
        if user.pk in _data_preparers(revision):
            return "The checker must be someone other than the person who prepared the data."
        return ""
    if not access.can_approve(user):
        verb = "approve" if meaning == SignOffMeaning.APPROVED else "issue"
        return f"Only an approving engineer can {verb} a report."
    if user.pk in _data_preparers(revision) or user.pk == revision.checked_by_id:
        who = "approver" if meaning == SignOffMeaning.APPROVED else "issuer"
        return f"The {who} must be someone other than the preparer and the checker."
    return ""


def _refuse_unless_may_sign(user: User, revision: ReportRevision, meaning: str) -> None:
    refusal = sign_refusal(user, revision, meaning)
    if refusal:
        raise NotAllowed(refusal)


def revision_check(
    *,
    user: User,
    revision: ReportRevision,
    password: str | None,
    expected_content_sha256: str | None = None,
) -> ReportRevision:
    """Checked: a second person, holding the checker role, who prepared neither data nor report."""
    _refuse_unless_may_sign(user, revision, SignOffMeaning.CHECKED)
    return _sign(
        user=user,
        revision=revision,
        password=password,
        meaning=SignOffMeaning.CHECKED,
        from_state=RevisionState.DRAFT,
        to_state=RevisionState.CHECKED,
        by_field="checked_by",
        expected_content_sha256=expected_content_sha256,
    )


def revision_approve(
    *,
    user: User,
    revision: ReportRevision,
    password: str | None,
    expected_content_sha256: str | None = None,
) -> ReportRevision:
    """Approved: an approving engineer who neither prepared nor checked it."""
    _refuse_unless_may_sign(user, revision, SignOffMeaning.APPROVED)
    return _sign(
        user=user,
        revision=revision,
        password=password,
        meaning=SignOffMeaning.APPROVED,
        from_state=RevisionState.CHECKED,
        to_state=RevisionState.APPROVED,
        by_field="approved_by",
        expected_content_sha256=expected_content_sha256,
    )


def revision_issue(*, user: User, revision: ReportRevision, password: str | None) -> ReportRevision:
    """Claim an approved revision for issue; the PDF is rendered and signed in the background.

    Claim first: many requests may arrive for the same revision, and exactly one may win.
    """
    _refuse_unless_may_sign(user, revision, SignOffMeaning.ISSUED)
    _require_password(
        user=user, password=password, revision=revision, meaning=SignOffMeaning.ISSUED
    )
    with transaction.atomic():
        claimed = ReportRevision.objects.filter(
            pk=revision.pk, state=RevisionState.APPROVED
        ).update(
            state=RevisionState.ISSUING,
            issued_by=user,
            issue_requested_at=timezone.now(),
            render_error="",
        )
        if claimed != 1:
            current = ReportRevision.objects.select_related("report").get(pk=revision.pk)
            raise Conflict(
                f"{current.label} is {current.get_state_display().lower()}; it cannot be issued again."
            )
        current = ReportRevision.objects.select_related("report").get(pk=revision.pk)
        audit_record(
            actor=user,
            action="revision_issue_requested",
            subject=_subject(current),
            field="state",
            old=RevisionState.APPROVED,
            new=RevisionState.ISSUING,
        )
        transaction.on_commit(lambda: revision_render_publish(revision_id=current.pk))
    return current


def revision_render_publish(*, revision_id: int) -> bool:
    """Hand the rendering of a revision being issued to a report worker (in-process when no
    broker is configured). Never waits on a dead broker and never raises for one: the revision
    stays "being issued" and the relay publishes it again (:func:`revisions_render_republish`).
    Returns whether it was handed over."""
    from reports import tasks  # tasks import services: import here to keep one direction
    from testing.services.computation import broker_reachable

    if settings.CELERY_TASK_ALWAYS_EAGER:
        tasks.render_revision.delay(revision_id)
        return True
    if not broker_reachable():
        logger.warning("Broker unreachable; revision %s waits to be rendered", revision_id)
        return False
    try:
        tasks.render_revision.apply_async(args=[revision_id], retry=False)
    except Exception as exc:  # kombu/redis connection errors: the relay tries again
        logger.warning("Revision %s not handed to a worker: %s", revision_id, exc)
        return False
    ReportRevision.objects.filter(pk=revision_id, state=RevisionState.ISSUING).update(
        render_published_at=timezone.now()
    )
    return True


def revisions_render_republish(*, now: datetime | None = None, **_: Any) -> dict[str, int]:
    """Revisions still being issued that were never handed to a worker, or were handed over more
    than ``TAULINE_RUN_REPUBLISH_SECONDS`` ago (the message or its worker was lost): hand them
    over again. Rendering twice is harmless: only one delivery can issue a revision. Connected to
    the relay's ``relay_pass`` signal."""
    now = now or timezone.now()
    stale = now - timedelta(seconds=settings.TAULINE_RUN_REPUBLISH_SECONDS)
    waiting = ReportRevision.objects.filter(state=RevisionState.ISSUING).filter(
        Q(render_published_at__isnull=True) | Q(render_published_at__lt=stale)
    )
    handed = 0
    for revision_id in waiting.order_by("id").values_list("id", flat=True)[:50]:
        if not revision_render_publish(revision_id=revision_id):
            break  # the broker is down: the next pass tries again
        handed += 1
    return {"report_renders_republished": handed}


def _certificate_record(info: CertificateInfo, *, at: datetime) -> SigningCertificate:
    """The lab certificate that signed a revision, recorded the first time it is used."""
    certificate, _ = SigningCertificate.objects.get_or_create(
        sha256_fingerprint=info.sha256_fingerprint,
        defaults={
            "pem": info.pem,
            "subject": info.subject[:300],
            "serial_number": info.serial_number,
            "not_valid_before": info.not_valid_before,
            "not_valid_after": info.not_valid_after,
            "first_used_at": at,
        },
    )
    return certificate


def revision_issue_complete(*, revision_id: int) -> ReportRevision | None:
    """Render, sign and store the PDF of a revision being issued. Safe to run twice."""
    from reports import signing
    from reports.rendering.html import render_report_html
    from reports.rendering.pdf import html_to_pdf

    revision = (
        ReportRevision.objects.select_related("report", "issued_by", "replaces")
        .filter(pk=revision_id, state=RevisionState.ISSUING)
        .first()
    )
    if revision is None:
        return None  # already issued, or sent back: nothing to do
    try:
        html = render_report_html(revision, issuing=True)
        signed = signing.sign_pdf_recorded(
            html_to_pdf(html),
            reason=f"Issued {revision.label}",
            signer_name=actor_name(revision.issued_by),
        )
        pdf_bytes = signed.pdf
    except Exception as exc:
        logger.exception("rendering %s failed", revision.label)
        ReportRevision.objects.filter(pk=revision.pk, state=RevisionState.ISSUING).update(
            state=RevisionState.APPROVED,
            issued_by=None,
            issue_requested_at=None,
            render_error=f"{type(exc).__name__}: {exc}"[:2000],
        )
        audit_record(
            actor=revision.issued_by,
            action="revision_issue_failed",
            subject=_subject(revision),
            reason=f"{type(exc).__name__}: {exc}"[:2000],
        )
        raise
    digest = signing.sha256_hex(pdf_bytes)
    now = timezone.now()
    with transaction.atomic():
        locked = list(
            ReportRevision.objects.select_for_update()
            .filter(report=revision.report_id)
            .order_by("pk")
        )
        mine = next(r for r in locked if r.pk == revision.pk)
        if mine.state != RevisionState.ISSUING:
            return None  # another delivery of this task finished first
        previous = [r for r in locked if r.state == RevisionState.ISSUED]
        for old in previous:
            ReportRevision.objects.filter(pk=old.pk, state=RevisionState.ISSUED).update(
                state=RevisionState.SUPERSEDED, superseded_at=now
            )
            audit_record(
                actor=revision.issued_by,
                action="revision_superseded",
                subject=_subject(old),
                field="state",
                old=RevisionState.ISSUED,
                new=RevisionState.SUPERSEDED,
                reason=f"replaced by {revision.label}",
            )
        mine.pdf.save(f"{mine.public_id.hex}.pdf", ContentFile(pdf_bytes), save=False)
        mine.pdf_sha256 = digest
        mine.pdf_size_bytes = len(pdf_bytes)
        mine.issued_at = now
        mine.state = RevisionState.ISSUED
        mine.signing_certificate = _certificate_record(signed.certificate, at=now)
        mine.save(
            update_fields=[
                "pdf",
                "pdf_sha256",
                "pdf_size_bytes",
                "issued_at",
                "state",
                "signing_certificate",
            ]
        )
        assert mine.issued_by is not None and mine.issue_requested_at is not None
        SignOff.objects.create(
            revision=mine,
            meaning=SignOffMeaning.ISSUED,
            user=mine.issued_by,
            printed_name=actor_name(mine.issued_by),
            role=_role_label(mine.issued_by, SignOffMeaning.ISSUED),
            signed_at=mine.issue_requested_at,
            content_sha256=mine.content_sha256,
            pdf_sha256=digest,
        )
        for test in revision.report.tests.all():
            test_mark_released(test=test, at=now)
        audit_record(
            actor=mine.issued_by,
            action="revision_issued",
            subject=_subject(mine),
            field="pdf_sha256",
            old=None,
            new=digest,
        )
    return mine


# --- Amendments and withdrawal -------------------------------------------------------------


def revision_supersede(*, user: User, revision: ReportRevision, reason: str) -> ReportRevision:
    """Start an amendment of the current issued revision: a new draft that names the one it
    replaces and lists each changed value with the reason. The issued one is unchanged until the
    new one is issued."""
    if not _can_prepare(user):
        raise NotAllowed("Only technicians and the lab manager prepare amendments.")
    if not reason.strip():
        raise ServiceError("Give the reason for the amendment.")
    with transaction.atomic():
        current = (
            ReportRevision.objects.select_for_update(of=("self",))
            .select_related("report")
            .get(pk=revision.pk)
        )
        if current.state != RevisionState.ISSUED:
            raise Conflict(f"{current.label} is not the current issued revision; amend that one.")
        if current.report.revisions.filter(
            state__in=["draft", "checked", "approved", "issuing"]
        ).exists():
            raise Conflict(f"{current.report.number} already has a revision in progress.")
        latest = (
            current.report.revisions.order_by("-number").values_list("number", flat=True).first()
        )
        new = _revision_new(
            user=user,
            report=current.report,
            number=(latest or current.number) + 1,
            tests=report_tests_load(current.report.tests.values_list("pk", flat=True)),
            title=current.title,
            remarks=current.remarks,
            deviations=current.deviations,
            replaces=current,
            amendment_reason=reason.strip(),
        )
        _sync_changes(new)
    return new


def revision_withdraw(*, user: User, revision: ReportRevision, reason: str) -> ReportRevision:
    """Withdraw a revision (in progress or issued) with a reason. Its record and PDF are kept."""
    if not (access.can_manage(user) or access.can_approve(user)):
        raise NotAllowed("Only the lab manager or an approving engineer can withdraw a report.")
    if not reason.strip():
        raise ServiceError("Give the reason for withdrawing the report.")
    allowed = [
        RevisionState.DRAFT,
        RevisionState.CHECKED,
        RevisionState.APPROVED,
        RevisionState.ISSUED,
    ]
    with transaction.atomic():
        before = ReportRevision.objects.get(pk=revision.pk).state
        moved = ReportRevision.objects.filter(pk=revision.pk, state__in=allowed).update(
            state=RevisionState.WITHDRAWN,
            withdrawn_at=timezone.now(),
            withdrawn_reason=reason.strip(),
        )
        if moved != 1:
            raise Conflict("This revision cannot be withdrawn in its present state.")
        audit_record(
            actor=user,
            action="revision_withdrawn",
            subject=_subject(revision),
            field="state",
            old=before,
            new=RevisionState.WITHDRAWN,
            reason=reason.strip(),
        )
    return ReportRevision.objects.select_related("report").get(pk=revision.pk)
