"""Test-set and stage pages: results, charts, computation progress, stage selection, readings in."""

from __future__ import annotations

from typing import Any

from django.contrib import messages
from django.core.exceptions import PermissionDenied
from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST

from testing import access, selectors, selectors_pages
from testing.forms import (
    ManualReadingsForm,
    ReadingImportForm,
    RecomputeForm,
    StageExcludeForm,
    StageIncludeForm,
)
from testing.models import EnvelopeType, ImportLayout, ImportState, ShearStage
from testing.services import imports, readings_entry
from testing.services.computation import stage_exclude, stage_include, test_recompute_request
from testing.services.errors import ServiceError
from testing.views import charts
from testing.views.common import CAUTION, optional_url, show_refusal, staff_page, staff_user

ENVELOPE_ORDER = [EnvelopeType.PEAK, EnvelopeType.ULTIMATE, EnvelopeType.RESIDUAL]


@staff_page
def test_list(request: HttpRequest) -> HttpResponse:
    tests = selectors.tests_for_user(user=request.user).order_by("-requested_on", "reference")
    return render(request, "testing/test_list.html", {"tests": tests[:200]})


@staff_page
def test_detail(request: HttpRequest, test_id: int) -> HttpResponse:
    test = access.test_get_for_user(user=request.user, test_id=test_id)
    page = selectors_pages.shear_test_page(user=request.user, test=test)
    curves = [charts.stage_curves(row.stage) for row in page.rows]
    envelopes = [
        {
            "label": test.envelope_label(t),
            "envelope": page.envelopes[t],
            "figure": charts.envelope_figure(page.envelopes[t]),
            "chart_id": f"chart-env-{t}",
            "title": "Shear stress against normal stress",
        }
        for t in ENVELOPE_ORDER
        if t in page.envelopes
    ]
    drawable = [c for c in curves if not c.error]
    context: dict[str, Any] = {
        "test": test,
        "page": page,
        "curves": curves,
        "consolidation_charts": [
            {
                "curves": c,
                "figure": charts.consolidation_figure(c, i),
                "chart_id": f"chart-cons-{c.stage_number}",
                "title": f"Stage {c.stage_number}: settlement against √time",
                "log_figure": charts.log_time_figure(c, i),
                "log_chart_id": f"chart-cons-log-{c.stage_number}",
                "log_title": f"Stage {c.stage_number}: settlement against log time",
            }
            for i, c in enumerate(curves)
            if c.consolidation_time_min
        ],
        "shear_chart": charts.shear_stress_figure(drawable) if drawable else None,
        "vertical_chart": charts.vertical_figure(drawable) if drawable else None,
        "envelopes": envelopes,
        "exclude_form": StageExcludeForm(),
        "recompute_form": RecomputeForm(),
        "can_select": access.can_enter_readings(request.user) or access.can_check(request.user),
        "released": test.released_at is not None,
        "reports_url": optional_url("reports:test-reports", test.pk),
        "caution": CAUTION,
    }
    return render(request, "testing/test_detail.html", context)


@staff_page
@require_GET
def test_runs(request: HttpRequest, test_id: int) -> JsonResponse:
    """Run states for the progress poll; ``busy`` tells the page whether to keep polling."""
    test = access.test_get_for_user(user=request.user, test_id=test_id)
    runs = selectors_pages.run_states(user=request.user, test=test)
    busy = any(run["state"] in ("queued", "running") for run in runs)
    response = JsonResponse({"busy": busy, "runs": runs})
    response["Cache-Control"] = "no-store"
    return response


@staff_page
@require_POST
def test_recompute(request: HttpRequest, test_id: int) -> HttpResponse:
    test = access.test_get_for_user(user=request.user, test_id=test_id)
    form = RecomputeForm(request.POST)
    if not form.is_valid():
        messages.error(request, "Give a reason for recomputing.")
    else:
        try:
            runs = test_recompute_request(
                test=test, user=staff_user(request), reason=form.cleaned_data["reason"]
            )
        except ServiceError as exc:
            show_refusal(request, exc)
        else:
            messages.success(
                request, f"{len(runs)} stage computation(s) queued; envelopes follow each stage."
            )
    return redirect("test-detail", test_id=test.pk)


@staff_page
@require_POST
def stage_exclude_view(request: HttpRequest, stage_id: int) -> HttpResponse:
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    form = StageExcludeForm(request.POST)
    if not form.is_valid():
        messages.error(request, "Give the reason for leaving this stage out of the envelope.")
    else:
        try:
            stage_exclude(
                stage=stage,
                envelope_type=form.cleaned_data["envelope_type"],
                reason=form.cleaned_data["reason"],
                user=staff_user(request),
            )
        except ServiceError as exc:
            show_refusal(request, exc)
        else:
            messages.success(
                request, f"Stage {stage.stage_number} left out; the envelope is being refitted."
            )
    return redirect(reverse("test-detail", args=[stage.test_id]) + "#selection")


@staff_page
@require_POST
def stage_include_view(request: HttpRequest, stage_id: int) -> HttpResponse:
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    form = StageIncludeForm(request.POST)
    if form.is_valid():
        try:
            stage_include(
                stage=stage,
                envelope_type=form.cleaned_data["envelope_type"],
                user=staff_user(request),
            )
        except ServiceError as exc:
            show_refusal(request, exc)
        else:
            messages.success(
                request, f"Stage {stage.stage_number} used again; the envelope is being refitted."
            )
    return redirect(reverse("test-detail", args=[stage.test_id]) + "#selection")


# --- Stage page: readings in -----------------------------------------------------------------------


def _layouts() -> Any:
    return ImportLayout.objects.order_by("name")


def _stage_page(
    request: HttpRequest, stage: ShearStage, *, status: int = 200, **extra: Any
) -> HttpResponse:
    context: dict[str, Any] = {
        "stage": stage,
        "test": stage.test,
        "result": selectors.latest_stage_result(stage=stage),
        "imports": stage.reading_imports.select_related("uploaded_by").order_by(
            "-uploaded_at", "-id"
        )[:10],
        "import_form": ReadingImportForm(layouts=_layouts()),
        "manual_form": ManualReadingsForm(stage=stage),
        "can_enter": access.can_enter_readings(request.user),
        "released": stage.test.released_at is not None,
        "max_upload_mb": imports.max_upload_bytes() / 1_000_000,
    }
    context.update(extra)
    return render(request, "testing/stage_detail.html", context, status=status)


@staff_page
def stage_detail(request: HttpRequest, stage_id: int) -> HttpResponse:
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    return _stage_page(request, stage)


def _layout_choice(form: ReadingImportForm) -> ImportLayout | None:
    layout = form.cleaned_data.get("layout")
    return layout if isinstance(layout, ImportLayout) else None


@staff_page
@require_POST
def stage_import_preview(request: HttpRequest, stage_id: int) -> HttpResponse:
    """Show the file's header, the columns found and the first rows; save nothing. With
    ``?fragment=1`` (the page's script) only the preview block is returned."""
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    form = ReadingImportForm(request.POST, request.FILES, layouts=_layouts())
    preview = None
    error = ""
    if form.is_valid():
        try:
            preview = imports.stage_readings_preview(
                user=staff_user(request),
                stage=stage,
                upload=form.cleaned_data["upload"],
                layout=_layout_choice(form),
            )
        except ServiceError as exc:
            error = str(exc)
    else:
        error = "Choose a logger file and a column layout."
    if request.GET.get("fragment"):
        return render(
            request,
            "testing/_import_preview.html",
            {"preview": preview, "error": error},
            status=200 if preview else 400,
        )
    return _stage_page(
        request,
        stage,
        status=200 if preview else 400,
        preview=preview,
        preview_error=error,
        import_form=form,
    )


@staff_page
@require_POST
def stage_import(request: HttpRequest, stage_id: int) -> HttpResponse:
    """Import a logger file: all rows or none; a rejected file lists every bad row."""
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    form = ReadingImportForm(request.POST, request.FILES, layouts=_layouts())
    if not form.is_valid():
        return _stage_page(
            request, stage, status=400, import_form=form, import_error="Choose a logger file."
        )
    try:
        record = imports.stage_readings_import(
            user=staff_user(request),
            stage=stage,
            upload=form.cleaned_data["upload"],
            layout=_layout_choice(form),
        )
    except ServiceError as exc:
        return _stage_page(request, stage, status=400, import_form=form, import_error=str(exc))
    if record.state == ImportState.SUCCEEDED:
        messages.success(
            request,
            f"Imported {record.original_name}: {record.shear_rows} shear and "
            f"{record.consolidation_rows} consolidation readings into stage {stage.stage_number}. "
            "The stage is being reduced.",
        )
        return redirect("test-detail", test_id=stage.test_id)
    if record.state == ImportState.DUPLICATE:
        messages.info(request, record.reason)
        return redirect("stage-detail", stage_id=stage.pk)
    return _stage_page(request, stage, status=400, rejected=record)


def _entry_form(request: HttpRequest, stage: ShearStage, **kwargs: Any) -> ManualReadingsForm:
    return ManualReadingsForm(
        request.POST, stage=stage, add_rows=request.POST.get("more", ""), **kwargs
    )


def _grid_page(
    request: HttpRequest, stage: ShearStage, form: ManualReadingsForm, *, status: int, **extra: Any
) -> HttpResponse:
    """The stage page with the grid as typed, its reduced values filled in (no script needed)."""
    if form.is_bound and not form.errors:
        form.attach_reduced(readings_entry.manual_rows_reduce(stage, form.reduce_rows()))
    return _stage_page(request, stage, status=status, manual_form=form, **extra)


@staff_page
@require_POST
def stage_enter(request: HttpRequest, stage_id: int) -> HttpResponse:
    """Save readings typed on the entry grid (consolidation, and the chosen shear traverse). "Add 10
    rows" and "Show reduced values" re-draw the grid as typed and save nothing."""
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    keep_typing = bool(request.POST.get("more") or request.POST.get("check"))
    form = _entry_form(request, stage, require_rows=not keep_typing)
    if not form.is_valid():
        return _grid_page(request, stage, form, status=400)
    if keep_typing:
        return _grid_page(request, stage, form, status=200)
    try:
        consolidation, shear = readings_entry.stage_readings_enter(
            user=staff_user(request), stage=stage, rows=form.rows()
        )
    except imports.ReadingsRejected as exc:
        return _grid_page(
            request,
            stage,
            form,
            status=400,
            manual_errors=form.mark_errors(exc.errors),
            manual_error=str(exc),
        )
    except ServiceError as exc:
        return _grid_page(request, stage, form, status=400, manual_error=str(exc))
    messages.success(
        request,
        f"Saved {consolidation} consolidation and {shear} shear readings"
        f"{f' (traverse {form.traverse_number})' if shear and stage.traverses > 1 else ''} for stage "
        f"{stage.stage_number}. The stage is being reduced.",
    )
    return redirect("test-detail", test_id=stage.test_id)


@staff_page
@require_POST
def stage_enter_reduce(request: HttpRequest, stage_id: int) -> JsonResponse:
    """Force [N] and shear stress on the nominal area [kPa] for each typed shear row of the grid,
    from the stage's calibration; saves nothing."""
    stage = access.stage_get_for_user(user=request.user, stage_id=stage_id)
    if not access.can_enter_readings(request.user):
        raise PermissionDenied("Only technicians and the lab manager enter readings.")
    form = _entry_form(request, stage, require_rows=False)
    if not form.is_valid():
        return JsonResponse({"error": "Some cells could not be read.", "rows": []}, status=400)
    rows = form.attach_reduced(readings_entry.manual_rows_reduce(stage, form.reduce_rows()))
    response = JsonResponse({"rows": rows})
    response["Cache-Control"] = "no-store"
    return response
