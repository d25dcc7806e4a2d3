"""Staff pages (the client portal lives in the reports app)."""

from django.urls import path

from testing import views

urlpatterns = [
    path("", views.home, name="home"),
    path("worklist/", views.worklist, name="worklist"),
    path("dashboard/", views.dashboard, name="dashboard"),
    path("projects/", views.project_list, name="project-list"),
    path("projects/<int:project_id>/", views.project_detail, name="project-detail"),
    path("projects/<int:project_id>/ags/", views.project_ags, name="project-ags"),
    path(
        "projects/<int:project_id>/results.<str:file_format>",
        views.project_results,
        name="project-results",
    ),
    path("boreholes/<int:borehole_id>/", views.borehole_detail, name="borehole-detail"),
    path("samples/<int:sample_id>/", views.sample_detail, name="sample-detail"),
    path("samples/<int:sample_id>/move/", views.sample_move, name="sample-move"),
    path("specimens/<int:specimen_id>/", views.specimen_detail, name="specimen-detail"),
    path("tests/", views.test_list, name="test-list"),
    path("tests/<int:test_id>/", views.test_detail, name="test-detail"),
    path("tests/<int:test_id>/runs.json", views.test_runs, name="test-runs"),
    path("tests/<int:test_id>/results.<str:file_format>", views.test_results, name="test-results"),
    path("tests/<int:test_id>/recompute/", views.test_recompute, name="test-recompute"),
    path("stages/<int:stage_id>/", views.stage_detail, name="stage-detail"),
    path("stages/<int:stage_id>/exclude/", views.stage_exclude_view, name="stage-exclude"),
    path("stages/<int:stage_id>/include/", views.stage_include_view, name="stage-include"),
    path(
        "stages/<int:stage_id>/import/preview/",
        views.stage_import_preview,
        name="stage-import-preview",
    ),
    path("stages/<int:stage_id>/import/", views.stage_import, name="stage-import"),
    path("stages/<int:stage_id>/readings/", views.stage_enter, name="stage-enter"),
    path(
        "stages/<int:stage_id>/readings/reduce/",
        views.stage_enter_reduce,
        name="stage-enter-reduce",
    ),
    path("assets/plotly-<str:version>.min.js", views.plotly_js, name="plotly-js"),
]
