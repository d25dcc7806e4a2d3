"""The client portal: read-only views of an organisation's projects, results and issued revisions."""

from __future__ import annotations

from django.urls import path

from reports.portal import views

app_name = "portal"

urlpatterns = [
    path("", views.portal_home, name="home"),
    path("projects/<int:project_id>/", views.portal_project, name="project"),
    path("tests/<int:test_id>/", views.portal_test, name="test"),
    path("revisions/<uuid:public_id>/", views.portal_revision, name="revision"),
    path(
        "revisions/<uuid:public_id>/tests/<int:test_id>/",
        views.portal_test,
        name="revision-test",
    ),
    path("revisions/<uuid:public_id>/pdf/", views.portal_pdf, name="pdf"),
    path("revisions/<uuid:public_id>/verify/", views.portal_verify, name="verify"),
]
