"""Files a person downloads from a page or the API: a project's AGS4 file, and the results tables of
a project or of one test set as CSV or XLSX. Each holds only what the user may see (a client: the
released test sets of their own organisation's projects); the caller has already found the project
or test set through ``access``.
"""

from __future__ import annotations

from dataclasses import dataclass

from django.contrib.auth.models import AnonymousUser, User
from django.http import HttpResponse

from testing.exporters.ags import project_ags_export
from testing.exporters.ags_dictionary import AGS_VERSIONS
from testing.exporters.tables import results_export
from testing.models import DirectShearTest, Project

TABLE_FORMATS = ("csv", "xlsx")
AGS_CONTENT_TYPE = "text/plain; charset=utf-8"  # AGS4 is plain CSV-like ASCII text with a .ags name


class DownloadRefused(ValueError):
    """A request for a format or version that is not offered; the message says what is."""


@dataclass(frozen=True)
class Download:
    content: bytes
    content_type: str
    filename: str

    def response(self) -> HttpResponse:
        response = HttpResponse(self.content, content_type=self.content_type)
        # Names are built from record references through safe_name: letters, digits, - and _.
        response["Content-Disposition"] = f'attachment; filename="{self.filename}"'
        response["X-Content-Type-Options"] = "nosniff"
        response["Cache-Control"] = "private, no-store"
        return response


def safe_name(text: str) -> str:
    """A reference made fit for a download's file name (letters, digits, - and _; at most 60)."""
    return (
        "".join(ch if ch.isascii() and (ch.isalnum() or ch in "-_") else "_" for ch in text)[:60]
        or "export"
    )


def project_ags_download(
    *, user: User | AnonymousUser, project: Project, version: str = "4.1.1"
) -> Download:
    if version not in AGS_VERSIONS:
        raise DownloadRefused(f"AGS version must be one of {', '.join(AGS_VERSIONS)}.")
    assert isinstance(user, User)  # only signed-in users reach a download
    content = project_ags_export(user=user, project=project, ags_version=version)
    return Download(
        content,
        AGS_CONTENT_TYPE,
        f"{safe_name(project.reference)}-ags{version.replace('.', '')}.ags",
    )


def _table_format(file_format: str) -> str:
    if file_format not in TABLE_FORMATS:
        raise DownloadRefused(f"The results tables come as {' or '.join(TABLE_FORMATS)}.")
    return file_format


def project_results_download(
    *, user: User | AnonymousUser, project: Project, file_format: str = "csv"
) -> Download:
    """The stage results (and, in XLSX, the envelopes) of every test set of the project."""
    content, content_type, filename = results_export(
        user=user,
        tests=DirectShearTest.objects.filter(project=project),
        file_format=_table_format(file_format),
        name=safe_name(project.reference),
    )
    return Download(content, content_type, filename)


def set_results_download(
    *, user: User | AnonymousUser, test: DirectShearTest, file_format: str = "csv"
) -> Download:
    """The stage results (and, in XLSX, the envelopes) of one test set."""
    content, content_type, filename = results_export(
        user=user,
        tests=[test],
        file_format=_table_format(file_format),
        name=safe_name(f"{test.project.reference}-{test.reference}"),
    )
    return Download(content, content_type, filename)
