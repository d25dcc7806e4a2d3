"""Audit events and sign-off records cannot be deleted (PostgreSQL).

0002 made both tables append-only for UPDATE; this refuses DELETE as well, so the trail of who did
what, and every signature, stays complete even for someone with direct SQL access short of the
table owner's TRUNCATE or DROP. PostgreSQL only: the embedded SQLite database is for trying the
application out, and Django's test-suite flush on SQLite deletes rows one table at a time.
"""

from django.db import migrations

_POSTGRES = [
    """
    CREATE TRIGGER reports_signoff_not_deleted BEFORE DELETE ON reports_signoff
    FOR EACH ROW EXECUTE FUNCTION reports_append_only();
    """,
    """
    CREATE TRIGGER reports_audit_not_deleted BEFORE DELETE ON reports_auditevent
    FOR EACH ROW EXECUTE FUNCTION reports_append_only();
    """,
]
_POSTGRES_DROP = [
    "DROP TRIGGER IF EXISTS reports_signoff_not_deleted ON reports_signoff;",
    "DROP TRIGGER IF EXISTS reports_audit_not_deleted ON reports_auditevent;",
]


def _run(statements_by_vendor):  # type: ignore[no-untyped-def]
    def apply(apps, schema_editor):  # type: ignore[no-untyped-def]
        for sql in statements_by_vendor.get(schema_editor.connection.vendor, []):
            schema_editor.execute(sql, None)

    return apply


class Migration(migrations.Migration):
    dependencies = [("reports", "0005_withdrawn_revisions_frozen")]

    operations = [
        migrations.RunPython(
            _run({"postgresql": _POSTGRES}),
            _run({"postgresql": _POSTGRES_DROP}),
        ),
    ]
