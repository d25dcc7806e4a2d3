"""Check a report PDF: exit 0 and print "valid" only for an authentic, unmodified issued revision."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser

from reports.verification import verify_pdf_bytes


class Command(BaseCommand):
    help = "Verify a Tauline report PDF (fingerprint and laboratory signature)."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("file", type=Path)

    def handle(self, *args: Any, **options: Any) -> None:
        path: Path = options["file"]
        if not path.is_file():
            raise CommandError(f"{path} is not a file.")
        result = verify_pdf_bytes(path.read_bytes())
        if not result.authentic:
            raise CommandError(result.message)
        self.stdout.write(result.message)
