"""The one router that assembles ``/api/v1/``, the token endpoints, the schema and its docs.

Each app registers its viewsets with its ``api.routes.register(router)`` (testing) or
``api.register(router)`` (reports, when that app provides an API).
"""

from __future__ import annotations

import importlib
import importlib.util

from django.urls import include, path
from drf_spectacular.views import SpectacularAPIView, SpectacularSwaggerSplitView
from rest_framework.routers import DefaultRouter

from testing.api import routes as testing_routes
from testing.api.views.auth import TokenObtainView, TokenRevokeView

app_name = "api"

router = DefaultRouter()
router.include_format_suffixes = False  # one URL per resource; the format is negotiated
testing_routes.register(router)
# The reports app's API is optional: the API works without it. If the package is there, it is
# imported normally, so a mistake inside it still fails loudly.
if importlib.util.find_spec("reports.api") is not None:
    importlib.import_module("reports.api").register(router)

urlpatterns = [
    path("v1/auth/token/", TokenObtainView.as_view(), name="token"),
    path("v1/auth/logout/", TokenRevokeView.as_view(), name="logout"),
    path("v1/", include(router.urls)),
    path("schema/", SpectacularAPIView.as_view(), name="schema"),
    # Swagger UI from the bundled (sidecar) assets: no CDN, and no inline script (CSP).
    path(
        "docs/",
        SpectacularSwaggerSplitView.as_view(
            url_name="api:schema", template_name="api/swagger_ui.html"
        ),
        name="docs",
    ),
]
