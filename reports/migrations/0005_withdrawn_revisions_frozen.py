"""A revision withdrawn after it was issued stays frozen.

The guard of 0002 (with the certificate column added in 0003) only held rows whose state was
'issued' or 'superseded', so once an issued revision was withdrawn its PDF hash, content and
sign-offs could be rewritten. It now also holds a withdrawn revision that has an issue time: its
frozen columns never change and it stays withdrawn. A revision withdrawn before it was issued
(no issue time) is not evidence and stays editable. Issued and superseded rows keep exactly the
rules they had (issued may still become superseded or withdrawn).
"""

from collections.abc import Callable
from typing import Any

from django.db import migrations

_WITHDRAWN_AFTER_ISSUE = "(OLD.state = 'withdrawn' AND OLD.issued_at IS NOT NULL)"


def _frozen_sqlite(with_withdrawn: bool) -> str:
    guarded = "OLD.state IN ('issued', 'superseded')"
    stays = ""
    if with_withdrawn:
        guarded = f"({guarded} OR {_WITHDRAWN_AFTER_ISSUE})"
        stays = "\n        OR (OLD.state = 'withdrawn' AND NEW.state <> 'withdrawn')"
    return f"""
    CREATE TRIGGER reports_revision_frozen BEFORE UPDATE ON reports_reportrevision
    WHEN {guarded} AND (
        NEW.content IS NOT OLD.content OR NEW.content_sha256 IS NOT OLD.content_sha256
        OR NEW.pdf IS NOT OLD.pdf OR NEW.pdf_sha256 IS NOT OLD.pdf_sha256
        OR NEW.issued_at IS NOT OLD.issued_at OR NEW.issued_by_id IS NOT OLD.issued_by_id
        OR NEW.checked_by_id IS NOT OLD.checked_by_id OR NEW.approved_by_id IS NOT OLD.approved_by_id
        OR NEW.prepared_by_id IS NOT OLD.prepared_by_id OR NEW.remarks IS NOT OLD.remarks
        OR NEW.deviations IS NOT OLD.deviations OR NEW.title IS NOT OLD.title
        OR NEW.signing_certificate_id IS NOT OLD.signing_certificate_id
        OR NEW.state NOT IN ('issued', 'superseded', 'withdrawn')
        OR (OLD.state = 'superseded' AND NEW.state <> 'superseded'){stays}
    )
    BEGIN SELECT RAISE(ABORT, 'an issued report revision cannot be edited'); END;
    """


def _frozen_postgres(with_withdrawn: bool) -> str:
    guarded = "OLD.state IN ('issued', 'superseded')"
    stays = ""
    if with_withdrawn:
        guarded = f"({guarded} OR {_WITHDRAWN_AFTER_ISSUE})"
        stays = "\n            OR (OLD.state = 'withdrawn' AND NEW.state <> 'withdrawn')"
    return f"""
    CREATE OR REPLACE FUNCTION reports_revision_frozen() RETURNS trigger AS $$
    BEGIN
        IF {guarded} AND (
            NEW.content IS DISTINCT FROM OLD.content
            OR NEW.content_sha256 IS DISTINCT FROM OLD.content_sha256
            OR NEW.pdf IS DISTINCT FROM OLD.pdf OR NEW.pdf_sha256 IS DISTINCT FROM OLD.pdf_sha256
            OR NEW.issued_at IS DISTINCT FROM OLD.issued_at
            OR NEW.issued_by_id IS DISTINCT FROM OLD.issued_by_id
            OR NEW.checked_by_id IS DISTINCT FROM OLD.checked_by_id
            OR NEW.approved_by_id IS DISTINCT FROM OLD.approved_by_id
            OR NEW.prepared_by_id IS DISTINCT FROM OLD.prepared_by_id
            OR NEW.remarks IS DISTINCT FROM OLD.remarks
            OR NEW.deviations IS DISTINCT FROM OLD.deviations
            OR NEW.title IS DISTINCT FROM OLD.title
            OR NEW.signing_certificate_id IS DISTINCT FROM OLD.signing_certificate_id
            OR NEW.state NOT IN ('issued', 'superseded', 'withdrawn')
            OR (OLD.state = 'superseded' AND NEW.state <> 'superseded'){stays}
        ) THEN
            RAISE EXCEPTION 'an issued report revision cannot be edited';
        END IF;
        RETURN NEW;
    END; $$ LANGUAGE plpgsql;
    """


_POSTGRES_TRIGGER = """
    CREATE TRIGGER reports_revision_frozen BEFORE UPDATE ON reports_reportrevision
    FOR EACH ROW EXECUTE FUNCTION reports_revision_frozen();
"""


def _sqlite(with_withdrawn: bool) -> list[str]:
    return ["DROP TRIGGER IF EXISTS reports_revision_frozen;", _frozen_sqlite(with_withdrawn)]


def _postgres(with_withdrawn: bool) -> list[str]:
    return [
        "DROP TRIGGER IF EXISTS reports_revision_frozen ON reports_reportrevision;",
        _frozen_postgres(with_withdrawn),
        _POSTGRES_TRIGGER,
    ]


def _run(statements_by_vendor: dict[str, list[str]]) -> Callable[[Any, Any], None]:
    def apply(apps: Any, schema_editor: Any) -> None:
        for sql in statements_by_vendor.get(schema_editor.connection.vendor, []):
            schema_editor.execute(sql, None)

    return apply


class Migration(migrations.Migration):
    dependencies = [("reports", "0004_revision_render_published_at")]

    operations = [
        migrations.RunPython(
            _run({"sqlite": _sqlite(True), "postgresql": _postgres(True)}),
            # Back to the guard as 0002 made it and 0003 extended it to the certificate.
            _run({"sqlite": _sqlite(False), "postgresql": _postgres(False)}),
        ),
    ]
