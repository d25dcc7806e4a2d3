from __future__ import annotations

from django.urls import path

from reports.portal import views

app_name = "portal"

urlpatterns = [
    path("", views.portal_home, name="home"),
    path("revisions/<uuid:public_id>/", views.portal_revision, name="revision"),
    path("revisions/<uuid:public_id>/pdf/", views.portal_pdf, name="pdf"),
    path("revisions/<uuid:public_id>/verify/", views.portal_verify, name="verify"),
]
