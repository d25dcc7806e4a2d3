"""Database guards behind the model checks: an issued revision's content, PDF and hashes never
change, a superseded revision never comes back, and sign-offs and audit events are append-only.

Only UPDATE is guarded here: deletion is already refused by PROTECT foreign keys (an issued
revision always has sign-offs), and SQLite's test flush deletes rows.
"""

from django.db import migrations

_SQLITE = [
    """
    CREATE TRIGGER reports_revision_frozen BEFORE UPDATE ON reports_reportrevision
    WHEN OLD.state IN ('issued', 'superseded') AND (
        NEW.content IS NOT OLD.content OR NEW.content_sha256 IS NOT OLD.content_sha256
        OR NEW.pdf IS NOT OLD.pdf OR NEW.pdf_sha256 IS NOT OLD.pdf_sha256
        OR NEW.issued_at IS NOT OLD.issued_at OR NEW.issued_by_id IS NOT OLD.issued_by_id
        OR NEW.checked_by_id IS NOT OLD.checked_by_id OR NEW.approved_by_id IS NOT OLD.approved_by_id
        OR NEW.prepared_by_id IS NOT OLD.prepared_by_id OR NEW.remarks IS NOT OLD.remarks
        OR NEW.deviations IS NOT OLD.deviations OR NEW.title IS NOT OLD.title
        OR NEW.state NOT IN ('issued', 'superseded', 'withdrawn')
        OR (OLD.state = 'superseded' AND NEW.state <> 'superseded')
    )
    BEGIN SELECT RAISE(ABORT, 'an issued report revision cannot be edited'); END;
    """,
    """
    CREATE TRIGGER reports_signoff_append_only BEFORE UPDATE ON reports_signoff
    BEGIN SELECT RAISE(ABORT, 'sign-offs are append-only'); END;
    """,
    """
    CREATE TRIGGER reports_audit_append_only BEFORE UPDATE ON reports_auditevent
    BEGIN SELECT RAISE(ABORT, 'audit events are append-only'); END;
    """,
]
_SQLITE_DROP = [
    "DROP TRIGGER IF EXISTS reports_revision_frozen;",
    "DROP TRIGGER IF EXISTS reports_signoff_append_only;",
    "DROP TRIGGER IF EXISTS reports_audit_append_only;",
]

_POSTGRES = [
    """
    CREATE OR REPLACE FUNCTION reports_revision_frozen() RETURNS trigger AS $$
    BEGIN
        IF OLD.state IN ('issued', 'superseded') AND (
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
            OR NEW.state NOT IN ('issued', 'superseded', 'withdrawn')
            OR (OLD.state = 'superseded' AND NEW.state <> 'superseded')
        ) THEN
            RAISE EXCEPTION 'an issued report revision cannot be edited';
        END IF;
        RETURN NEW;
    END; $$ LANGUAGE plpgsql;
    """,
    """
    CREATE TRIGGER reports_revision_frozen BEFORE UPDATE ON reports_reportrevision
    FOR EACH ROW EXECUTE FUNCTION reports_revision_frozen();
    """,
    """
    CREATE OR REPLACE FUNCTION reports_append_only() RETURNS trigger AS $$
    BEGIN
        RAISE EXCEPTION '% rows are append-only', TG_TABLE_NAME;
    END; $$ LANGUAGE plpgsql;
    """,
    """
    CREATE TRIGGER reports_signoff_append_only BEFORE UPDATE ON reports_signoff
    FOR EACH ROW EXECUTE FUNCTION reports_append_only();
    """,
    """
    CREATE TRIGGER reports_audit_append_only BEFORE UPDATE ON reports_auditevent
    FOR EACH ROW EXECUTE FUNCTION reports_append_only();
    """,
]
_POSTGRES_DROP = [
    "DROP TRIGGER IF EXISTS reports_revision_frozen ON reports_reportrevision;",
    "DROP TRIGGER IF EXISTS reports_signoff_append_only ON reports_signoff;",
    "DROP TRIGGER IF EXISTS reports_audit_append_only ON reports_auditevent;",
    "DROP FUNCTION IF EXISTS reports_revision_frozen();",
    "DROP FUNCTION IF EXISTS reports_append_only();",
]


def _run(statements_by_vendor):  # type: ignore[no-untyped-def]
    def apply(apps, schema_editor):  # type: ignore[no-untyped-def]
        for sql in statements_by_vendor.get(schema_editor.connection.vendor, []):
            schema_editor.execute(sql, None)

    return apply


class Migration(migrations.Migration):
    dependencies = [("reports", "0001_initial")]

    operations = [
        migrations.RunPython(
            _run({"sqlite": _SQLITE, "postgresql": _POSTGRES}),
            _run({"sqlite": _SQLITE_DROP, "postgresql": _POSTGRES_DROP}),
        ),
    ]
