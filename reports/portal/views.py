"""Client-facing, read-only pages scoped by organisation.

A client sees their own organisation's issued revisions (current, superseded — with a link to the
replacement — or withdrawn) and nothing else; anything else answers the same 404 as a random id.
"""

from __future__ import annotations

from django.contrib.auth.decorators import login_required
from django.core.exceptions import PermissionDenied
from django.http import FileResponse, Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.views.decorators.http import require_http_methods

from reports import forms, selectors
from reports.verification import MAX_UPLOAD_BYTES, Verification, verify_pdf_bytes


@login_required
def portal_home(request: HttpRequest) -> HttpResponse:
    revisions = selectors.revisions_for_user(user=request.user).filter(issued_at__isnull=False)
    return render(request, "portal/home.html", {"revisions": revisions})


@login_required
def portal_revision(request: HttpRequest, public_id: str) -> HttpResponse:
    revision = selectors.revision_get_by_public_id(user=request.user, public_id=public_id)
    if revision.issued_at is None:
        raise Http404("No such record.")
    return render(
        request,
        "portal/revision.html",
        {
            "revision": revision,
            "replaced_by": selectors.replacement_of(revision),
            "changes": revision.changes.all(),
        },
    )


@login_required
def portal_pdf(request: HttpRequest, public_id: str) -> FileResponse:
    revision = selectors.revision_get_by_public_id(user=request.user, public_id=public_id)
    if not revision.pdf or revision.issued_at is None:
        raise Http404("No such record.")
    return FileResponse(
        revision.pdf.open("rb"),
        as_attachment=True,
        filename=f"{revision.report.number}-rev{revision.number}.pdf",
        content_type="application/pdf",
    )


@login_required
@require_http_methods(["GET", "POST"])
def portal_verify(request: HttpRequest, public_id: str) -> HttpResponse:
    """Check an uploaded PDF against this revision: same bytes, intact lab signature."""
    revision = selectors.revision_get_by_public_id(user=request.user, public_id=public_id)
    if revision.issued_at is None:
        raise Http404("No such record.")
    form = forms.VerifyForm(request.POST or None, request.FILES or None)
    result: Verification | None = None
    matches = False
    if request.method == "POST" and form.is_valid() and form.cleaned_data.get("file"):
        upload = form.cleaned_data["file"]
        if upload.size > MAX_UPLOAD_BYTES:
            raise PermissionDenied("File too large.")
        result = verify_pdf_bytes(upload.read())
        matches = (
            result.authentic and result.revision is not None and result.revision.pk == revision.pk
        )
    return render(
        request,
        "portal/verify.html",
        {"revision": revision, "form": form, "result": result, "matches": matches},
    )
