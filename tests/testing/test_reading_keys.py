"""Shear readings are keyed by (stage, traverse, reading number) and their stage is checked by
database triggers, not by a per-row foreign key (migration testing 0009). The rules a foreign key
and a unique index gave must all still hold, on both databases, for the ORM and for the COPY path."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

import numpy as np
import pytest
from django.db import IntegrityError, connection, transaction
from django.db.migrations.executor import MigrationExecutor

from testing.importers.rows import ParsedReadings
from testing.models import ShearReading, ShearStage
from testing.services.readings_store import write_shear_rows
from tests.conftest import Cast, Records
from tests.importers.conftest import make_stage

BEFORE = ("testing", "0008_test_set_failure_displacement")
AFTER = ("testing", "0009_shear_readings_keyed")
COLUMNS = "stage_id, traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading"


def _reading(stage_id: int, seq: int, traverse: int = 1) -> ShearReading:
    return ShearReading(
        stage_id=stage_id, traverse=traverse, seq=seq, elapsed_min=float(seq),
        horizontal_mm=0.01 * seq, vertical_mm=0.0, force_reading=10.0 + seq,
    )  # fmt: skip


def _parsed(n: int) -> ParsedReadings:
    return ParsedReadings(
        shear_elapsed_min=np.arange(n, dtype=float),
        shear_horizontal_mm=np.linspace(0, 5, n),
        shear_vertical_mm=np.zeros(n),
        shear_force=np.full(n, 100.0),
        shear_traverse=np.ones(n, dtype=np.int64),
        shear_seq=np.arange(1, n + 1, dtype=np.int64),
    )


def _missing_stage_id() -> int:
    return (ShearStage.objects.order_by("-pk").values_list("pk", flat=True).first() or 0) + 1000


@pytest.mark.django_db
def test_a_reading_for_a_stage_that_does_not_exist_is_refused(
    cast: Cast, records_a: Records
) -> None:
    stage = make_stage(cast, records_a, 1)
    ShearReading.objects.bulk_create([_reading(stage.pk, 1)])
    with pytest.raises(IntegrityError), transaction.atomic():
        ShearReading.objects.bulk_create([_reading(stage.pk, 2), _reading(_missing_stage_id(), 1)])
    with pytest.raises(IntegrityError), transaction.atomic():
        ShearReading.objects.filter(stage=stage).update(stage_id=_missing_stage_id())
    assert list(ShearReading.objects.values_list("stage_id", "seq")) == [(stage.pk, 1)]


@pytest.mark.django_db
def test_the_bulk_write_path_checks_the_stage_too(cast: Cast, records_a: Records) -> None:
    """On PostgreSQL this is the binary COPY; elsewhere, batched inserts."""
    stage = make_stage(cast, records_a, 1)
    with pytest.raises(IntegrityError), transaction.atomic():
        write_shear_rows(_missing_stage_id(), _parsed(12_000))
    assert ShearReading.objects.count() == 0
    write_shear_rows(stage.pk, _parsed(12_000))
    assert ShearReading.objects.filter(stage=stage).count() == 12_000


@pytest.mark.django_db
def test_a_reading_number_is_unique_within_its_traverse(cast: Cast, records_a: Records) -> None:
    stage = make_stage(cast, records_a, 1)
    ShearReading.objects.bulk_create([_reading(stage.pk, 1), _reading(stage.pk, 1, traverse=2)])
    with pytest.raises(IntegrityError), transaction.atomic():
        ShearReading.objects.bulk_create([_reading(stage.pk, 1)])
    assert ShearReading.objects.filter(stage=stage).count() == 2


@pytest.mark.django_db
def test_deleting_a_stage_in_sql_takes_its_readings_and_its_id_cannot_change(
    cast: Cast, records_a: Records
) -> None:
    keep = make_stage(cast, records_a, 1)
    gone = make_stage(cast, records_a, 2)
    ShearReading.objects.bulk_create([_reading(keep.pk, 1), _reading(gone.pk, 1)])
    table = connection.ops.quote_name(ShearStage._meta.db_table)
    with pytest.raises(IntegrityError), transaction.atomic(), connection.cursor() as cursor:
        cursor.execute(f"UPDATE {table} SET id = %s WHERE id = %s", [_missing_stage_id(), keep.pk])
    with connection.cursor() as cursor:
        cursor.execute(f"DELETE FROM {table} WHERE id = %s", [gone.pk])
    assert list(ShearReading.objects.values_list("stage_id", flat=True)) == [keep.pk]


@contextmanager
def _old_layout() -> Iterator[None]:
    """The database as it was before 0009 for the duration, then migrated forward again."""
    MigrationExecutor(connection).migrate([BEFORE])
    try:
        yield
    finally:
        executor = MigrationExecutor(connection)
        executor.loader.build_graph()
        # Forward to every app's latest migration (going back to 0008 also undid later ones).
        executor.migrate(executor.loader.graph.leaf_nodes())
        assert AFTER in MigrationExecutor(connection).loader.applied_migrations


@pytest.mark.django_db(transaction=True)
def test_the_migration_keeps_every_reading(cast: Cast, records_a: Records) -> None:
    """Readings stored under the old layout (surrogate id) are all there, unchanged, after 0009,
    and come back when it is reversed."""
    stage = make_stage(cast, records_a, 1)
    rows = [
        (stage.pk, t, s, 0.5 * s, 0.01 * s, -0.001 * s, 3.0 * s) for t in (1, 2) for s in (1, 2, 3)
    ]
    with _old_layout(), connection.cursor() as cursor:
        cursor.executemany(
            f"INSERT INTO testing_shearreading ({COLUMNS}) VALUES (%s, %s, %s, %s, %s, %s, %s)",
            rows,
        )
    stored = list(
        ShearReading.objects.order_by("traverse", "seq").values_list(*COLUMNS.split(", "))
    )
    assert stored == rows
    with _old_layout(), connection.cursor() as cursor:
        cursor.execute(f"SELECT {COLUMNS} FROM testing_shearreading ORDER BY traverse, seq")
        assert [tuple(r) for r in cursor.fetchall()] == rows
