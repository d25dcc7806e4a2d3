"""Shear readings stored in column blocks: one row per run of up to 50,000 consecutive readings of
a traverse, each column a packed array of little-endian doubles.

Before: one row per reading, keyed (stage, traverse, seq), with the stage checked per statement by
triggers (0009); a million-reading import spent most of its time maintaining that key. After: a
million readings are a few dozen rows with an ordinary foreign key to the stage, so the triggers
of 0009 go. The readings are packed into the new table and the old one is dropped; going back
unpacks them (and restores 0009's triggers). Nothing is lost either way.
"""

import importlib
import itertools

import django.db.models.deletion
import django.db.models.expressions
import django.db.models.functions.text
import django.db.models.lookups
import numpy as np
from django.db import migrations, models

_BLOCK = 50_000
_COLUMNS = ("elapsed_min", "horizontal_mm", "vertical_mm", "force_reading")
_keyed = importlib.import_module("testing.migrations.0009_shear_readings_keyed")


def _triggers(statements):  # type: ignore[no-untyped-def]
    return [sql for sql in statements if not sql.lstrip().startswith("ALTER")]


_DROP = {
    "postgresql": _triggers(_keyed._POSTGRES_DROP),
    "sqlite": _keyed._SQLITE_DROP,
}
_CREATE = {
    "postgresql": _triggers(_keyed._POSTGRES),
    "sqlite": _keyed._SQLITE,
}
_EXTERNAL = {  # packed doubles do not compress: store them out of line, uncompressed
    "postgresql": [
        f"ALTER TABLE testing_shearreadingblock ALTER COLUMN {c} SET STORAGE EXTERNAL;"
        for c in _COLUMNS
    ]
}


def _pack(apps, schema_editor):  # type: ignore[no-untyped-def]
    block_model = apps.get_model("testing", "ShearReadingBlock")
    with schema_editor.connection.cursor() as cursor:
        cursor.execute("SELECT DISTINCT stage_id FROM testing_shearreading ORDER BY stage_id")
        stages = [row[0] for row in cursor.fetchall()]
        for stage_id in stages:
            cursor.execute(
                "SELECT traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading "
                "FROM testing_shearreading WHERE stage_id = %s ORDER BY traverse, seq",
                [stage_id],
            )
            table = np.asarray(cursor.fetchall(), dtype=np.float64).reshape(-1, 6)
            tr, sq = table[:, 0].astype(np.int64), table[:, 1].astype(np.int64)
            breaks = np.flatnonzero((np.diff(tr) != 0) | (np.diff(sq) != 1)) + 1
            cuts = [0, *breaks.tolist(), len(table)]
            blocks = []
            for run_start, run_stop in itertools.pairwise(cuts):
                for start in range(run_start, run_stop, _BLOCK):
                    stop = min(run_stop, start + _BLOCK)
                    blocks.append(
                        block_model(
                            stage_id=stage_id,
                            traverse=int(tr[start]),
                            first_seq=int(sq[start]),
                            count=stop - start,
                            **{
                                name: (table[start:stop, 2 + k] + 0.0).astype("<f8").tobytes()
                                for k, name in enumerate(_COLUMNS)
                            },
                        )
                    )
            block_model.objects.bulk_create(blocks)


def _unpack(apps, schema_editor):  # type: ignore[no-untyped-def]
    block_model = apps.get_model("testing", "ShearReadingBlock")
    sql = (
        "INSERT INTO testing_shearreading (stage_id, traverse, seq, elapsed_min, horizontal_mm, "
        "vertical_mm, force_reading) VALUES (%s, %s, %s, %s, %s, %s, %s)"
    )
    with schema_editor.connection.cursor() as cursor:
        for block in block_model.objects.order_by("stage_id", "traverse", "first_seq").iterator():
            columns = [np.frombuffer(getattr(block, c), dtype="<f8").tolist() for c in _COLUMNS]
            cursor.executemany(
                sql,
                [
                    (block.stage_id, block.traverse, block.first_seq + i, *values)
                    for i, values in enumerate(zip(*columns, strict=True))
                ],
            )


def _length_check(column):  # type: ignore[no-untyped-def]
    return models.CheckConstraint(
        condition=django.db.models.lookups.Exact(
            django.db.models.functions.text.Length(column),
            django.db.models.expressions.CombinedExpression(
                models.F("count"), "*", models.Value(8)
            ),
        ),
        name=f"shear_block_{column}_length",
    )


class Migration(migrations.Migration):
    dependencies = [("testing", "0010_apparatus_tolerances")]

    operations = [
        migrations.CreateModel(
            name="ShearReadingBlock",
            fields=[
                (
                    "id",
                    models.BigAutoField(
                        auto_created=True, primary_key=True, serialize=False, verbose_name="ID"
                    ),
                ),
                ("traverse", models.PositiveSmallIntegerField(default=1)),
                (
                    "first_seq",
                    models.PositiveIntegerField(
                        help_text="Reading number (within the traverse) of the block's first reading."
                    ),
                ),
                ("count", models.PositiveIntegerField(help_text="Readings in the block.")),
                (
                    "elapsed_min",
                    models.BinaryField(help_text="Time since shearing started [min], float64 LE."),
                ),
                (
                    "horizontal_mm",
                    models.BinaryField(
                        help_text="Relative horizontal displacement [mm], float64 LE."
                    ),
                ),
                (
                    "vertical_mm",
                    models.BinaryField(
                        help_text="Vertical displacement, dilation (upward) positive [mm], float64 LE."
                    ),
                ),
                (
                    "force_reading",
                    models.BinaryField(
                        help_text="Force device reading [div or N, see the stage], float64 LE."
                    ),
                ),
                (
                    "stage",
                    models.ForeignKey(
                        db_index=False,
                        on_delete=django.db.models.deletion.CASCADE,
                        related_name="shear_blocks",
                        to="testing.shearstage",
                    ),
                ),
            ],
            options={
                "ordering": ["stage", "traverse", "first_seq"],
                "constraints": [
                    models.UniqueConstraint(
                        fields=("stage", "traverse", "first_seq"), name="shear_block_unique"
                    ),
                    models.CheckConstraint(
                        condition=models.Q(("traverse__gte", 1)),
                        name="shear_block_traverse_positive",
                    ),
                    models.CheckConstraint(
                        condition=models.Q(("first_seq__gte", 1)),
                        name="shear_block_first_seq_positive",
                    ),
                    models.CheckConstraint(
                        condition=models.Q(("count__gte", 1)), name="shear_block_not_empty"
                    ),
                    *(_length_check(c) for c in _COLUMNS),
                ],
            },
        ),
        migrations.RunPython(_keyed._run(_EXTERNAL), migrations.RunPython.noop),
        migrations.RunPython(_pack, _unpack),
        migrations.RunPython(_keyed._run(_DROP), _keyed._run(_CREATE)),
        migrations.DeleteModel(name="ShearReading"),
    ]
