"""Check every issued report revision end to end; exit non-zero naming each revision that fails.

For each revision that was ever issued (current, superseded or withdrawn after issue):

- the stored PDF exists, its sha256 and size match the database, and its embedded lab signature
  validates against the lab certificate that signed it (``reports.verification``);
- the frozen content still hashes to ``content_sha256``;
- the sign-offs (checked, approved, issued) exist, are by the recorded people and bind this
  content (and, for the issue, this PDF);
- the audit trail is complete and unbroken: the creation event, every content re-freeze linking
  the first content hash to the final one, check, approval, issue request and issue by the
  recorded people, in that order, plus supersession or withdrawal where the state says so.

And for every stage: its readings-change audit rows link from no readings to the last change,
and the readings stored now hash to what the last change left (nothing was changed around the
application). And the database's guard triggers (``reports.guards``) are all present and
enabled.

Run it after a restore (``scripts/restore-drill.sh`` does) and on a schedule.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser

from labsite.dbguards import guard_trigger_problems
from reports import guards as report_guards
from reports import signing
from reports.models import (
    AuditEvent,
    Report,
    ReportRevision,
    RevisionState,
    SignOff,
    SignOffMeaning,
)
from reports.rendering.context import content_sha256
from reports.verification import revision_signature_check
from testing.models import ShearStage
from testing.services.readings_audit import readings_trail_problems

# Workflow steps every issued revision went through, in order: (audit action, revision field
# holding the person who had to do it).
_STEPS = (
    ("revision_checked", "checked_by_id"),
    ("revision_approved", "approved_by_id"),
    ("revision_issue_requested", "issued_by_id"),
    ("revision_issued", "issued_by_id"),
)
_SIGNOFF_BY = {
    SignOffMeaning.CHECKED: "checked_by_id",
    SignOffMeaning.APPROVED: "approved_by_id",
    SignOffMeaning.ISSUED: "issued_by_id",
}


def _name(revision: ReportRevision) -> str:
    return f"{revision.label} (revision id {revision.pk})"


def _pdf_problems(revision: ReportRevision, check_signature: bool) -> list[str]:
    if not revision.pdf.name:
        return ["no stored PDF"]
    try:
        with revision.pdf.open("rb") as fh:
            data = fh.read()
    except OSError as exc:
        return [f"stored PDF {revision.pdf.name} cannot be read: {exc}"]
    problems = []
    digest = signing.sha256_hex(data)
    if digest != revision.pdf_sha256:
        problems.append(
            f"stored PDF sha256 {digest} does not match the recorded {revision.pdf_sha256}"
        )
    if revision.pdf_size_bytes is not None and len(data) != revision.pdf_size_bytes:
        problems.append(
            f"stored PDF is {len(data)} bytes, the record says {revision.pdf_size_bytes}"
        )
    if check_signature:
        check = revision_signature_check(revision, data)
        if not check.valid:
            problems.append(f"the lab signature does not validate: {check.problem}")
    return problems


def _signoff_problems(revision: ReportRevision, signoffs: Iterable[SignOff]) -> list[str]:
    problems = []
    by_meaning = {s.meaning: s for s in signoffs}
    for meaning, field in _SIGNOFF_BY.items():
        signoff = by_meaning.get(meaning)
        if signoff is None:
            problems.append(f"the '{meaning}' sign-off is missing")
            continue
        if signoff.user_id != getattr(revision, field):
            problems.append(f"the '{meaning}' sign-off is by another user than the record names")
        if signoff.content_sha256 != revision.content_sha256:
            problems.append(f"the '{meaning}' sign-off binds other content")
        if meaning == SignOffMeaning.ISSUED and signoff.pdf_sha256 != revision.pdf_sha256:
            problems.append("the 'issued' sign-off binds another PDF")
    return problems


def _audit_problems(revision: ReportRevision, events: list[AuditEvent]) -> list[str]:
    """The revision's own trail: complete (every step present) and unbroken (hashes link, in order)."""
    problems: list[str] = []
    by_action: dict[str, list[AuditEvent]] = defaultdict(list)
    for event in events:
        by_action[event.action].append(event)

    created = by_action.get("revision_created", [])
    if len(created) != 1:
        problems.append(f"expected one 'revision_created' audit event, found {len(created)}")
        return problems
    first = created[0]
    new = first.new_value if isinstance(first.new_value, dict) else {}
    content_hash = new.get("content_sha256")
    # Every re-freeze of a draft must start from the hash the previous event left.
    for event in by_action.get("revision_content_frozen", []):
        if event.old_value != content_hash:
            problems.append(
                f"audit trail broken at event {event.pk}: content re-frozen from "
                f"{event.old_value}, but the trail had reached {content_hash}"
            )
        content_hash = event.new_value
    if content_hash != revision.content_sha256:
        problems.append(
            f"audit trail does not reach the revision's content hash (trail ends at {content_hash})"
        )

    previous = first
    for action, field in _STEPS:
        found = by_action.get(action, [])
        if not found:
            problems.append(f"the '{action}' audit event is missing")
            continue
        event = found[-1]  # an issue that failed and was retried leaves earlier requests
        if event.actor_id != getattr(revision, field):
            problems.append(f"the '{action}' audit event names another actor than the record")
        if (event.at, event.pk) < (previous.at, previous.pk):
            problems.append(f"the '{action}' audit event is out of order")
        previous = event
    issued = by_action.get("revision_issued", [])
    if issued and issued[-1].new_value != revision.pdf_sha256:
        problems.append("the 'revision_issued' audit event records another PDF hash")
    if revision.state == RevisionState.SUPERSEDED and not by_action.get("revision_superseded"):
        problems.append("superseded, but the 'revision_superseded' audit event is missing")
    if revision.state == RevisionState.WITHDRAWN and not by_action.get("revision_withdrawn"):
        problems.append("withdrawn, but the 'revision_withdrawn' audit event is missing")
    return problems


class Command(BaseCommand):
    help = (
        "Verify every issued report revision: stored PDF hash, lab signature, sign-offs and an "
        "unbroken audit trail. Exits 1 and names each failing revision."
    )

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument(
            "--skip-signatures",
            action="store_true",
            help="Do not validate the PDF signatures (for example on a host without the lab certificate).",
        )

    def handle(self, *args: Any, **options: Any) -> None:
        check_signature = not options["skip_signatures"]
        failures: list[str] = []
        if check_signature:
            _, cert_path = signing.key_paths()
            if not Path(cert_path).is_file():
                raise CommandError(
                    f"The lab certificate {cert_path} is missing, so no signature can be checked "
                    "(restore MEDIA_ROOT/keys or set TAULINE_SIGNING_CERT_FILE)."
                )

        report_events = set(
            AuditEvent.objects.filter(action="report_created").values_list("subject", "new_value")
        )
        for report in Report.objects.order_by("pk"):
            if (f"report:{report.pk}", report.number) not in report_events:
                failures.append(
                    f"report {report.number} (report id {report.pk}): "
                    "the 'report_created' audit event is missing"
                )

        revisions = list(
            ReportRevision.objects.select_related("report", "signing_certificate").order_by(
                "report_id", "number"
            )
        )
        subjects = [f"revision:{r.pk}" for r in revisions]
        events: dict[str, list[AuditEvent]] = defaultdict(list)
        for event in AuditEvent.objects.filter(subject__in=subjects).order_by("at", "pk"):
            events[event.subject].append(event)
        signoffs: dict[int, list[SignOff]] = defaultdict(list)
        for signoff in SignOff.objects.filter(revision__in=revisions):
            signoffs[signoff.revision_id].append(signoff)

        checked = 0
        for revision in revisions:
            trail = events.get(f"revision:{revision.pk}", [])
            if revision.issued_at is None:
                if not any(e.action == "revision_created" for e in trail):
                    failures.append(
                        f"{_name(revision)}: the 'revision_created' audit event is missing"
                    )
                continue
            checked += 1
            problems = _pdf_problems(revision, check_signature)
            if content_sha256(revision.content) != revision.content_sha256:
                problems.append("the frozen content no longer matches its recorded hash")
            problems += _signoff_problems(revision, signoffs.get(revision.pk, []))
            problems += _audit_problems(revision, trail)
            failures += [f"{_name(revision)}: {problem}" for problem in problems]

        failures += guard_trigger_problems(report_guards.GUARD_TRIGGERS)

        stages = 0
        for stage_id, test_reference, stage_number in ShearStage.objects.order_by("id").values_list(
            "id", "test__reference", "stage_number"
        ):
            stages += 1
            failures += [
                f"test set {test_reference} stage {stage_number} (stage id {stage_id}): {problem}"
                for problem in readings_trail_problems(stage_id)
            ]

        if failures:
            for line in failures:
                self.stderr.write(f"FAIL {line}")
            raise CommandError(
                f"integrity check failed: {len(failures)} problem(s) over {checked} issued "
                "revision(s)."
            )
        self.stdout.write(
            f"ok: {checked} issued revision(s) of {len(revisions)} checked (PDF sha256, "
            f"{'signature, ' if check_signature else ''}sign-offs, audit trail); "
            f"{sum(len(v) for v in events.values())} audit events read; readings of {stages} "
            "stage(s) match their audit trail; database guard triggers in place."
        )
