"""Write a project's AGS4 file: ``manage.py ags_export --project TL-2026-014 --output out.ags``."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser

from testing.exporters.ags import project_ags_export
from testing.exporters.ags_dictionary import AGS_VERSIONS
from testing.models import Project


class Command(BaseCommand):
    help = "Export a project's locations, samples and shear box results as an AGS4 file."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--project", required=True, help="Project reference.")
        parser.add_argument("--output", required=True, help="File to write.")
        parser.add_argument("--ags-version", default="4.1.1", choices=AGS_VERSIONS)

    def handle(self, *args: Any, **options: Any) -> None:
        project = Project.objects.filter(reference=options["project"]).first()
        if project is None:
            raise CommandError(f"No project with reference {options['project']!r}.")
        data = project_ags_export(user=None, project=project, ags_version=options["ags_version"])
        Path(options["output"]).write_bytes(data)
        self.stdout.write(
            f"Wrote {len(data)} bytes of AGS {options['ags_version']} to {options['output']}."
        )
