"""Shear readings keyed by (stage, traverse, reading number), with the stage checked per statement.

Before: a surrogate ``id`` (a sequence call and a second index per row), the unique
(stage, traverse, seq) index, and a deferred foreign key whose check runs once per row at commit
(about 7 s for a million-reading import on a 2-core machine). After: the natural key is the primary
key, and database triggers keep the reference to the stage whole:

- PostgreSQL: after each INSERT or UPDATE statement, the distinct stages named by the new rows are
  locked ``FOR KEY SHARE`` (as a foreign-key check does) and a missing one raises
  ``foreign_key_violation``; after a DELETE statement on stages, their readings go too (the model's
  CASCADE); a stage's id cannot change.
- SQLite: the same rules, row by row (cheap there).

The readings move to a new table and the old one is dropped; nothing is lost.
"""

import django.db.models.deletion
from django.db import migrations, models

_COLUMNS = "stage_id, traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading"

_POSTGRES = [
    "ALTER INDEX testing_shearreading_keyed_pkey RENAME TO testing_shearreading_pkey;",
    "ALTER TABLE testing_shearreading RENAME CONSTRAINT testing_shearreading_keyed_seq_check "
    "TO testing_shearreading_seq_check;",
    "ALTER TABLE testing_shearreading RENAME CONSTRAINT testing_shearreading_keyed_traverse_check "
    "TO testing_shearreading_traverse_check;",
    """
    CREATE FUNCTION testing_shear_reading_stage_check() RETURNS trigger
    LANGUAGE plpgsql AS $$
    DECLARE
        missing bigint;
    BEGIN
        PERFORM 1 FROM testing_shearstage s
         WHERE s.id IN (SELECT DISTINCT n.stage_id FROM new_rows n)
         FOR KEY SHARE;
        SELECT n.stage_id INTO missing
          FROM (SELECT DISTINCT stage_id FROM new_rows) n
         WHERE NOT EXISTS (SELECT 1 FROM testing_shearstage s WHERE s.id = n.stage_id)
         LIMIT 1;
        IF FOUND THEN
            RAISE EXCEPTION 'shear readings name stage % that does not exist', missing
                USING ERRCODE = 'foreign_key_violation';
        END IF;
        RETURN NULL;
    END $$;
    """,
    """
    CREATE TRIGGER testing_shear_reading_stage_insert AFTER INSERT ON testing_shearreading
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION testing_shear_reading_stage_check();
    """,
    """
    CREATE TRIGGER testing_shear_reading_stage_update AFTER UPDATE ON testing_shearreading
    REFERENCING NEW TABLE AS new_rows
    FOR EACH STATEMENT EXECUTE FUNCTION testing_shear_reading_stage_check();
    """,
    """
    CREATE FUNCTION testing_shear_stage_readings_cascade() RETURNS trigger
    LANGUAGE plpgsql AS $$
    BEGIN
        DELETE FROM testing_shearreading r USING old_rows o WHERE r.stage_id = o.id;
        RETURN NULL;
    END $$;
    """,
    """
    CREATE TRIGGER testing_shear_stage_readings_delete AFTER DELETE ON testing_shearstage
    REFERENCING OLD TABLE AS old_rows
    FOR EACH STATEMENT EXECUTE FUNCTION testing_shear_stage_readings_cascade();
    """,
    """
    CREATE FUNCTION testing_shear_stage_id_fixed() RETURNS trigger
    LANGUAGE plpgsql AS $$
    BEGIN
        RAISE EXCEPTION 'a stage''s id cannot change (its readings refer to it)'
            USING ERRCODE = 'foreign_key_violation';
    END $$;
    """,
    """
    CREATE TRIGGER testing_shear_stage_id_update BEFORE UPDATE OF id ON testing_shearstage
    FOR EACH ROW WHEN (OLD.id IS DISTINCT FROM NEW.id)
    EXECUTE FUNCTION testing_shear_stage_id_fixed();
    """,
]
_POSTGRES_DROP = [
    "DROP TRIGGER IF EXISTS testing_shear_stage_id_update ON testing_shearstage;",
    "DROP FUNCTION IF EXISTS testing_shear_stage_id_fixed();",
    "DROP TRIGGER IF EXISTS testing_shear_stage_readings_delete ON testing_shearstage;",
    "DROP FUNCTION IF EXISTS testing_shear_stage_readings_cascade();",
    "DROP TRIGGER IF EXISTS testing_shear_reading_stage_update ON testing_shearreading;",
    "DROP TRIGGER IF EXISTS testing_shear_reading_stage_insert ON testing_shearreading;",
    "DROP FUNCTION IF EXISTS testing_shear_reading_stage_check();",
    "ALTER INDEX testing_shearreading_pkey RENAME TO testing_shearreading_keyed_pkey;",
    "ALTER TABLE testing_shearreading RENAME CONSTRAINT testing_shearreading_seq_check "
    "TO testing_shearreading_keyed_seq_check;",
    "ALTER TABLE testing_shearreading RENAME CONSTRAINT testing_shearreading_traverse_check "
    "TO testing_shearreading_keyed_traverse_check;",
]
_SQLITE = [
    """
    CREATE TRIGGER testing_shear_reading_stage_insert BEFORE INSERT ON testing_shearreading
    FOR EACH ROW WHEN NOT EXISTS (SELECT 1 FROM testing_shearstage WHERE id = NEW.stage_id)
    BEGIN SELECT RAISE(ABORT, 'FOREIGN KEY constraint failed: shear reading stage'); END;
    """,
    """
    CREATE TRIGGER testing_shear_reading_stage_update BEFORE UPDATE OF stage_id
    ON testing_shearreading
    FOR EACH ROW WHEN NOT EXISTS (SELECT 1 FROM testing_shearstage WHERE id = NEW.stage_id)
    BEGIN SELECT RAISE(ABORT, 'FOREIGN KEY constraint failed: shear reading stage'); END;
    """,
    """
    CREATE TRIGGER testing_shear_stage_readings_delete AFTER DELETE ON testing_shearstage
    FOR EACH ROW BEGIN DELETE FROM testing_shearreading WHERE stage_id = OLD.id; END;
    """,
    """
    CREATE TRIGGER testing_shear_stage_id_update BEFORE UPDATE OF id ON testing_shearstage
    FOR EACH ROW WHEN OLD.id IS NOT NEW.id
    BEGIN SELECT RAISE(ABORT, 'FOREIGN KEY constraint failed: stage id is fixed'); END;
    """,
]
_SQLITE_DROP = [
    "DROP TRIGGER IF EXISTS testing_shear_stage_id_update;",
    "DROP TRIGGER IF EXISTS testing_shear_stage_readings_delete;",
    "DROP TRIGGER IF EXISTS testing_shear_reading_stage_update;",
    "DROP TRIGGER IF EXISTS testing_shear_reading_stage_insert;",
]


def _run(statements_by_vendor):  # type: ignore[no-untyped-def]
    def apply(apps, schema_editor):  # type: ignore[no-untyped-def]
        for sql in statements_by_vendor.get(schema_editor.connection.vendor, []):
            schema_editor.execute(sql, None)

    return apply


def _copy_forwards(apps, schema_editor):  # type: ignore[no-untyped-def]
    schema_editor.execute(
        f"INSERT INTO testing_shearreading_keyed ({_COLUMNS}) "
        f"SELECT {_COLUMNS} FROM testing_shearreading",
        None,
    )


def _copy_backwards(apps, schema_editor):  # type: ignore[no-untyped-def]
    schema_editor.execute(
        f"INSERT INTO testing_shearreading ({_COLUMNS}) "
        f"SELECT {_COLUMNS} FROM testing_shearreading_keyed",
        None,
    )


class Migration(migrations.Migration):
    dependencies = [("testing", "0008_test_set_failure_displacement")]

    operations = [
        migrations.CreateModel(
            name="ShearReadingKeyed",
            fields=[
                (
                    "pk",
                    models.CompositePrimaryKey(
                        "stage",
                        "traverse",
                        "seq",
                        blank=True,
                        editable=False,
                        primary_key=True,
                        serialize=False,
                    ),
                ),
                ("traverse", models.PositiveSmallIntegerField(default=1)),
                (
                    "seq",
                    models.PositiveIntegerField(help_text="Reading number within the traverse."),
                ),
                (
                    "elapsed_min",
                    models.FloatField(help_text="Time since shearing started [min]."),
                ),
                (
                    "horizontal_mm",
                    models.FloatField(help_text="Relative horizontal displacement [mm]."),
                ),
                (
                    "vertical_mm",
                    models.FloatField(
                        help_text="Vertical displacement, dilation (upward) positive [mm]."
                    ),
                ),
                (
                    "force_reading",
                    models.FloatField(help_text="Force device reading [div or N, see the stage]."),
                ),
                (
                    "stage",
                    models.ForeignKey(
                        db_constraint=False,
                        db_index=False,
                        on_delete=django.db.models.deletion.CASCADE,
                        related_name="+",
                        to="testing.shearstage",
                    ),
                ),
            ],
            options={
                "db_table": "testing_shearreading_keyed",
                "ordering": ["stage", "traverse", "seq"],
                "constraints": [
                    models.CheckConstraint(
                        condition=models.Q(("elapsed_min__gte", 0)),
                        name="shear_reading_time_nonnegative",
                    ),
                    models.CheckConstraint(
                        condition=models.Q(("traverse__gte", 1)),
                        name="shear_reading_traverse_positive",
                    ),
                ],
            },
        ),
        migrations.RunPython(_copy_forwards, _copy_backwards),
        migrations.DeleteModel(name="ShearReading"),
        migrations.RenameModel(old_name="ShearReadingKeyed", new_name="ShearReading"),
        migrations.AlterModelTable(name="shearreading", table=None),
        migrations.AlterField(
            model_name="shearreading",
            name="stage",
            field=models.ForeignKey(
                db_constraint=False,
                db_index=False,
                on_delete=django.db.models.deletion.CASCADE,
                related_name="shear_readings",
                to="testing.shearstage",
            ),
        ),
        migrations.RunPython(
            _run({"postgresql": _POSTGRES, "sqlite": _SQLITE}),
            _run({"postgresql": _POSTGRES_DROP, "sqlite": _SQLITE_DROP}),
        ),
    ]
