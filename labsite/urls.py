"""Top-level URL map."""

from django.contrib import admin
from django.contrib.auth import views as auth_views
from django.urls import include, path

from labsite import health

urlpatterns = [
    path("healthz", health.healthz, name="healthz"),
    path("accounts/login/", auth_views.LoginView.as_view(), name="login"),
    path("accounts/logout/", auth_views.LogoutView.as_view(), name="logout"),
    path("admin/", admin.site.urls),
    path("api/", include("labsite.api_urls")),
    path("portal/", include("reports.portal.urls")),
    path("", include("reports.urls")),
    path("", include("testing.urls")),
]

# Error pages in the site's own layout.
handler403 = "testing.views.errors.permission_denied"
handler404 = "testing.views.errors.page_not_found"
handler500 = "testing.views.errors.server_error"
