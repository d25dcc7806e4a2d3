"""Reading XLSX logger files safely: size and ratio checks before openpyxl sees the file.

An XLSX file is a zip archive. A few kilobytes can unpack to gigabytes (a "zip bomb"), so the
archive's directory is read first and the file is refused if its unpacked size passes the cap,
if any member is compressed more than ``MAX_RATIO`` times, or if it has too many members. Then
openpyxl opens it in read-only mode (rows streamed, not the whole workbook in memory); openpyxl
parses XML through defusedxml when it is installed (it is a dependency of python-ags4).
"""

from __future__ import annotations

import io
import zipfile
from collections.abc import Iterator, Sequence

# Spreadsheet XML of numbers compresses about 5–20 times (measured here on openpyxl output of
# logger-like sheets); 200 leaves a wide margin while stopping the classic bombs (1000×+).
MAX_RATIO = 200
MAX_MEMBERS = 500


class UnsafeSpreadsheet(ValueError):
    """An XLSX file refused before loading; the message says why."""


def is_xlsx(data: bytes, filename: str) -> bool:
    return data[:4] == b"PK\x03\x04" or filename.lower().endswith(".xlsx")


def check_archive(data: bytes, *, max_uncompressed_bytes: int) -> None:
    """Refuse a zip bomb or a file that is not an XLSX archive, without unpacking anything."""
    try:
        archive = zipfile.ZipFile(io.BytesIO(data))
    except zipfile.BadZipFile as exc:
        raise UnsafeSpreadsheet("The file is not a valid XLSX workbook.") from exc
    with archive:
        members = archive.infolist()
        if len(members) > MAX_MEMBERS:
            raise UnsafeSpreadsheet(
                f"The workbook has {len(members)} parts; at most {MAX_MEMBERS} are accepted."
            )
        total = 0
        for info in members:
            total += info.file_size
            if info.file_size > MAX_RATIO * max(info.compress_size, 1):
                raise UnsafeSpreadsheet(
                    f"The workbook part {info.filename!r} unpacks to {info.file_size} bytes from "
                    f"{info.compress_size}: more than {MAX_RATIO} times; refused as a possible zip bomb."
                )
        if total > max_uncompressed_bytes:
            raise UnsafeSpreadsheet(
                f"The workbook unpacks to {total} bytes; the limit is {max_uncompressed_bytes} bytes."
            )
        if "[Content_Types].xml" not in archive.namelist():
            raise UnsafeSpreadsheet("The file is not a valid XLSX workbook.")


def xlsx_rows(
    data: bytes, *, sheet_name: str, max_uncompressed_bytes: int
) -> Iterator[tuple[int, Sequence[object]]]:
    """(row number from 1, cell values) for every row of the chosen sheet (the first if blank).

    Raises :class:`UnsafeSpreadsheet` before loading if the archive fails the checks above.
    """
    check_archive(data, max_uncompressed_bytes=max_uncompressed_bytes)
    from openpyxl import load_workbook

    try:
        book = load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many types for a damaged workbook
        raise UnsafeSpreadsheet(f"The workbook could not be read: {exc}") from exc
    try:
        if sheet_name:
            if sheet_name not in book.sheetnames:
                raise UnsafeSpreadsheet(
                    f"The workbook has no sheet named {sheet_name!r} "
                    f"(it has {', '.join(book.sheetnames)})."
                )
            sheet = book[sheet_name]
        else:
            sheet = book.worksheets[0]
        yield from enumerate(sheet.iter_rows(values_only=True), start=1)
    finally:
        book.close()
