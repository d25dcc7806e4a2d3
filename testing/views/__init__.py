"""Staff pages, split by sub-domain; explicit re-exports keep ``testing.views.home`` working."""

from testing.views.assets import plotly_js
from testing.views.dashboard import dashboard
from testing.views.errors import page_not_found, permission_denied, server_error
from testing.views.exports import project_ags, project_results, test_results
from testing.views.records import (
    borehole_detail,
    project_detail,
    project_list,
    sample_detail,
    sample_move,
    specimen_detail,
)
from testing.views.tests import (
    stage_detail,
    stage_enter,
    stage_enter_reduce,
    stage_exclude_view,
    stage_import,
    stage_import_preview,
    stage_include_view,
    test_detail,
    test_list,
    test_recompute,
    test_runs,
)
from testing.views.worklist import home, worklist

__all__ = [
    "borehole_detail",
    "dashboard",
    "home",
    "page_not_found",
    "permission_denied",
    "plotly_js",
    "project_ags",
    "project_detail",
    "project_list",
    "project_results",
    "sample_detail",
    "sample_move",
    "server_error",
    "specimen_detail",
    "stage_detail",
    "stage_enter",
    "stage_enter_reduce",
    "stage_exclude_view",
    "stage_import",
    "stage_import_preview",
    "stage_include_view",
    "test_detail",
    "test_list",
    "test_recompute",
    "test_results",
    "test_runs",
    "worklist",
]
