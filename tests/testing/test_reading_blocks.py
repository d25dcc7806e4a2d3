"""Shear readings are stored in column blocks (migration testing 0011): one row per run of
consecutive readings of a traverse, each column packed little-endian doubles. What the row-per-
reading table guaranteed must still hold, on both databases: a block names a stage that exists, a
reading number is not given twice, a stage's readings go with it, values come back bit for bit
and in (traverse, reading number) order, and the migration loses nothing either way."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager

import numpy as np
import pytest
from django.db import IntegrityError, connection, transaction
from django.db.migrations.executor import MigrationExecutor

from testing.models import ShearReadingBlock, ShearStage
from testing.selectors_readings import (
    ShearColumns,
    ShearReadingPages,
    shear_columns,
    shear_force_span,
    shear_reading_count,
)
from testing.services import readings_store
from testing.services.readings_store import write_shear_columns
from tests.conftest import Cast, Records
from tests.importers.conftest import make_stage

BEFORE = ("testing", "0010_apparatus_tolerances")
AFTER = ("testing", "0011_shear_reading_blocks")
COLUMNS = "stage_id, traverse, seq, elapsed_min, horizontal_mm, vertical_mm, force_reading"


def _columns(traverse: list[int], seq: list[int], seed: int = 3) -> ShearColumns:
    rng = np.random.default_rng(seed)
    n = len(seq)
    return ShearColumns(
        traverse=np.asarray(traverse, dtype=np.int64),
        seq=np.asarray(seq, dtype=np.int64),
        elapsed_min=np.arange(n) * 0.25 + rng.random(n) * 1e-3,
        horizontal_mm=rng.normal(2.0, 1.0, n),
        vertical_mm=rng.normal(0.0, 0.1, n),
        force_reading=rng.normal(300.0, 50.0, n),
    )


def _checked(action: Callable[[], object]) -> None:
    """``action`` in a savepoint, then the constraints checked as at commit (PostgreSQL checks a
    deferred foreign key only then)."""
    with transaction.atomic():
        action()
        connection.check_constraints()


def _execute(sql: str, params: list[object]) -> None:
    with connection.cursor() as cursor:
        cursor.execute(sql, params)


def _missing_stage_id() -> int:
    return (ShearStage.objects.order_by("-pk").values_list("pk", flat=True).first() or 0) + 1000


@pytest.mark.django_db
def test_readings_come_back_bit_for_bit_in_traverse_and_reading_order(
    cast: Cast, records_a: Records, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Two traverses given interleaved and out of order, cut into blocks of 1,000: the stored
    columns are the given values sorted by (traverse, reading number), exactly (float64 bits)."""
    monkeypatch.setattr(readings_store, "BLOCK_READINGS", 1000)
    stage = make_stage(cast, records_a, 1)
    n1, n2 = 2500, 1200
    traverse = [1] * n1 + [2] * n2
    seq = list(range(1, n1 + 1)) + list(range(1, n2 + 1))
    given = _columns(traverse, seq)
    shuffle = np.random.default_rng(5).permutation(n1 + n2)
    write_shear_columns(stage.pk, given.take(shuffle))
    assert ShearReadingBlock.objects.filter(stage=stage).count() == 3 + 2  # 2500 → 3, 1200 → 2
    stored = shear_columns(stage.pk)
    for got, want in zip(stored.arrays(), given.arrays(), strict=True):
        assert got.tobytes() == np.asarray(want, dtype=got.dtype).tobytes()
    assert shear_reading_count(stage.pk) == n1 + n2
    assert shear_force_span(stage.pk) == (given.force_reading.min(), given.force_reading.max())
    only_two = shear_columns(stage.pk, traverses=[2])
    assert set(only_two.traverse.tolist()) == {2} and len(only_two) == n2


@pytest.mark.django_db
def test_negative_zero_is_stored_as_zero(cast: Cast, records_a: Records) -> None:
    """As the audit digest reads it (a database column may not keep the sign of zero)."""
    stage = make_stage(cast, records_a, 1)
    c = _columns([1, 1], [1, 2])
    write_shear_columns(
        stage.pk, ShearColumns(c.traverse, c.seq, np.array([0.0, 1.0]), np.array([-0.0, 0.1]),
                               c.vertical_mm, c.force_reading)
    )  # fmt: skip
    assert np.signbit(shear_columns(stage.pk).horizontal_mm).tolist() == [False, False]


@pytest.mark.django_db
def test_a_block_for_a_stage_that_does_not_exist_is_refused(cast: Cast, records_a: Records) -> None:
    stage = make_stage(cast, records_a, 1)
    write_shear_columns(stage.pk, _columns([1, 1], [1, 2]))
    with pytest.raises(IntegrityError):
        _checked(lambda: write_shear_columns(_missing_stage_id(), _columns([1], [1])))
    with pytest.raises(IntegrityError):
        _checked(
            lambda: ShearReadingBlock.objects.filter(stage=stage).update(
                stage_id=_missing_stage_id()
            )
        )
    assert list(ShearReadingBlock.objects.values_list("stage_id", "count")) == [(stage.pk, 2)]


@pytest.mark.django_db
def test_a_reading_number_given_twice_in_a_traverse_is_refused(
    cast: Cast, records_a: Records
) -> None:
    stage = make_stage(cast, records_a, 1)
    with pytest.raises(IntegrityError, match="reading 2 of traverse 1 is given twice"):
        write_shear_columns(stage.pk, _columns([1, 1, 1, 2], [1, 2, 2, 2]))
    assert shear_reading_count(stage.pk) == 0
    write_shear_columns(stage.pk, _columns([1, 1, 2], [1, 2, 1]))  # 1 again in another traverse
    assert shear_reading_count(stage.pk) == 3
    with pytest.raises(IntegrityError), transaction.atomic():  # the unique block start
        write_shear_columns(stage.pk, _columns([1], [1]))
    with pytest.raises(IntegrityError, match="count from 1"):
        write_shear_columns(stage.pk, _columns([1], [0]))


@pytest.mark.django_db
def test_a_block_whose_columns_do_not_match_its_count_is_refused(
    cast: Cast, records_a: Records
) -> None:
    stage = make_stage(cast, records_a, 1)
    three, two = np.zeros(3).tobytes(), np.zeros(2).tobytes()
    for columns in ((three, three, three, two), (two, two, two, two)):
        with pytest.raises(IntegrityError), transaction.atomic():
            ShearReadingBlock.objects.create(
                stage=stage, traverse=1, first_seq=1, count=3,
                **dict(zip(ShearReadingBlock.COLUMNS, columns, strict=True)),
            )  # fmt: skip
    assert not ShearReadingBlock.objects.exists()


@pytest.mark.django_db
def test_a_stage_deleted_takes_its_readings_and_sql_cannot_orphan_them(
    cast: Cast, records_a: Records
) -> None:
    keep = make_stage(cast, records_a, 1)
    gone = make_stage(cast, records_a, 2)
    write_shear_columns(keep.pk, _columns([1], [1]))
    write_shear_columns(gone.pk, _columns([1, 1], [1, 2]))
    table = connection.ops.quote_name(ShearStage._meta.db_table)
    with pytest.raises(IntegrityError):
        _checked(lambda: _execute(f"DELETE FROM {table} WHERE id = %s", [keep.pk]))
    ShearStage.objects.filter(pk=gone.pk).delete()
    assert list(ShearReadingBlock.objects.values_list("stage_id", flat=True)) == [keep.pk]


@pytest.mark.django_db
def test_pages_of_readings_match_the_columns_across_block_edges(
    cast: Cast, records_a: Records, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(readings_store, "BLOCK_READINGS", 7)
    stage = make_stage(cast, records_a, 1)
    write_shear_columns(stage.pk, _columns([1] * 20 + [2] * 9, [*range(1, 21), *range(1, 10)]))
    rows = list(shear_columns(stage.pk).rows())
    pages = ShearReadingPages(stage.pk)
    assert len(pages) == 29
    for start, stop in ((0, 5), (5, 15), (13, 22), (20, 29), (25, 40), (30, 35)):
        assert pages[start:stop] == rows[start:stop], (start, stop)
    assert pages[-1] == rows[-1] and pages[20].traverse == 2 and pages[20].seq == 1
    with pytest.raises(IndexError):
        pages[29]
    assert len(ShearReadingPages(make_stage(cast, records_a, 2).pk)) == 0


@contextmanager
def _old_layout() -> Iterator[None]:
    """The database as it was before 0011 for the duration, then migrated forward again."""
    MigrationExecutor(connection).migrate([BEFORE])
    try:
        yield
    finally:
        executor = MigrationExecutor(connection)
        executor.loader.build_graph()
        # Forward to every app's latest migration (going back also undid later ones).
        executor.migrate(executor.loader.graph.leaf_nodes())
        assert AFTER in MigrationExecutor(connection).loader.applied_migrations


@pytest.mark.django_db(transaction=True)
def test_the_migration_keeps_every_reading(cast: Cast, records_a: Records) -> None:
    """Readings stored one row each (0010's layout) are all there, bit for bit, after 0011 packs
    them (a gap in the reading numbers starts a new block), and come back when it is reversed."""
    stage = make_stage(cast, records_a, 1)
    rows = [
        (stage.pk, t, s, 0.5 * s + 0.1 / 3, 0.01 * s, -0.001 * s, 3.0 * s + 1e-9)
        for t, numbers in ((1, (1, 2, 3, 5)), (2, (1, 2)))
        for s in numbers
    ]
    with _old_layout(), connection.cursor() as cursor:
        cursor.executemany(
            f"INSERT INTO testing_shearreading ({COLUMNS}) VALUES (%s, %s, %s, %s, %s, %s, %s)",
            rows,
        )
    assert ShearReadingBlock.objects.filter(stage=stage).count() == 3  # 1–3, 5, and traverse 2
    stored = shear_columns(stage.pk)
    assert [
        (stage.pk, *r) for r in zip(*(a.tolist() for a in stored.arrays()), strict=True)
    ] == rows
    with _old_layout(), connection.cursor() as cursor:
        cursor.execute(f"SELECT {COLUMNS} FROM testing_shearreading ORDER BY traverse, seq")
        assert [tuple(r) for r in cursor.fetchall()] == rows


def test_the_block_insert_names_the_model_s_table_and_columns() -> None:
    """The write path's SQL is a fixed string (no names formatted in); it must match the model."""
    meta = ShearReadingBlock._meta
    names = ["stage", "traverse", "first_seq", "count", *ShearReadingBlock.COLUMNS]
    columns = ", ".join(f'"{meta.get_field(n).column}"' for n in names)  # type: ignore[union-attr]
    expected = f'INSERT INTO "{meta.db_table}" ({columns}) VALUES ({", ".join(["%s"] * 8)})'
    assert expected == readings_store.INSERT_BLOCK_SQL
