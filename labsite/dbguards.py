"""Are the database's guard triggers in place? Each app lists the triggers its migrations create
(``reports.guards``); this reads what the database has.

A trigger can go without anyone changing the code: ``ALTER TABLE … DISABLE TRIGGER`` (or the
replica role) on PostgreSQL, a restore that skipped them, or on SQLite a migration that rebuilt the
table. ``manage.py verify_integrity`` reports each missing or disabled one by name.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping

from django.db import connection

# Per database vendor: table -> the guard triggers on it.
GuardTriggers = Mapping[str, Mapping[str, Iterable[str]]]

# PostgreSQL pg_trigger.tgenabled: O fires in normal sessions, A always; D disabled, R replica only.
_PG_FIRING = {"O", "A"}


def _present() -> dict[tuple[str, str], bool]:
    """(table, trigger) -> whether it fires in a normal session, for every user trigger."""
    with connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            cursor.execute(
                "SELECT c.relname, t.tgname, t.tgenabled FROM pg_trigger t "
                "JOIN pg_class c ON c.oid = t.tgrelid "
                "WHERE NOT t.tgisinternal AND pg_catalog.pg_table_is_visible(c.oid)"
            )
            return {(table, name): enabled in _PG_FIRING for table, name, enabled in cursor}
        if connection.vendor == "sqlite":
            cursor.execute("SELECT tbl_name, name FROM sqlite_master WHERE type = 'trigger'")
            return dict.fromkeys(cursor, True)
    return {}


def guard_trigger_problems(*expected: GuardTriggers) -> list[str]:
    """One line per expected guard trigger that is missing or does not fire; [] when all are in
    place. Vendors with no list (neither PostgreSQL nor SQLite) are not checked."""
    present = _present()
    problems = []
    for guards in expected:
        for table, names in sorted(guards.get(connection.vendor, {}).items()):
            for name in names:
                state = present.get((table, name))
                if state is None:
                    problems.append(f"database guard trigger {name} on {table} is missing")
                elif not state:
                    problems.append(f"database guard trigger {name} on {table} is disabled")
    return problems
