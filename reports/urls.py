"""Staff report pages and the public verification page."""

from __future__ import annotations

from django.urls import path

from reports import views

app_name = "reports"

urlpatterns = [
    path("reports/", views.report_list, name="list"),
    path("reports/new/", views.report_create, name="create"),
    path("reports/revisions/<int:pk>/", views.revision_detail, name="revision"),
    path("reports/revisions/<int:pk>/preview/", views.revision_preview, name="preview"),
    path("reports/revisions/<int:pk>/pdf/", views.revision_pdf, name="pdf"),
    path("reports/revisions/<int:pk>/edit/", views.revision_edit, name="edit"),
    path("reports/revisions/<int:pk>/sign/<str:action>/", views.revision_sign, name="sign"),
    path("reports/revisions/<int:pk>/supersede/", views.revision_supersede, name="supersede"),
    path("reports/revisions/<int:pk>/withdraw/", views.revision_withdraw, name="withdraw"),
    path("reports/revisions/<int:pk>/audit/", views.revision_audit, name="audit"),
    path("verify/", views.verify, name="verify"),
]
