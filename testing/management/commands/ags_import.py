"""Import locations, samples and other labs' shear box results from an AGS4 file.

``manage.py ags_import FILE --user USERNAME [--project REF] [--dry-run]``: prints the validation
report first; saves only if it has no errors (and not with ``--dry-run``).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from django.contrib.auth import get_user_model
from django.core.management.base import BaseCommand, CommandError, CommandParser

from testing.importers.ags import ags_project_reference
from testing.models import Project
from testing.services.errors import ServiceError
from testing.services.imports import ags_import_apply, ags_import_preview


class Command(BaseCommand):
    help = "Check an AGS4 file and import its LOCA, SAMP, SHBG and SHBT groups into a project."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("file")
        parser.add_argument("--user", required=True, help="Username of the technician importing.")
        parser.add_argument("--project", help="Project reference (default: the file's PROJ_ID).")
        parser.add_argument("--dry-run", action="store_true", help="Report only; save nothing.")

    def handle(self, *args: Any, **options: Any) -> None:
        path = Path(options["file"])
        if not path.is_file():
            raise CommandError(f"No such file: {path}")
        data = path.read_bytes()
        user = get_user_model().objects.filter(username=options["user"]).first()
        if user is None:
            raise CommandError(f"No user {options['user']!r}.")
        reference = options["project"]
        if not reference:
            reference = ags_project_reference(data)
        project = Project.objects.filter(reference=reference).first()
        if project is None:
            raise CommandError(f"No project {reference!r}; create it first or pass --project.")
        try:
            plan = ags_import_preview(user=user, project=project, data=data)
            self.stdout.write(plan.report())
            if not plan.ok:
                raise CommandError("Nothing was imported: fix the errors above.")
            if options["dry_run"]:
                self.stdout.write("Dry run: nothing was saved.")
                return
            ags_import_apply(user=user, project=project, data=data, filename=path.name)
        except ServiceError as exc:
            raise CommandError(str(exc)) from exc
        self.stdout.write(f"Imported into {project.reference}.")
