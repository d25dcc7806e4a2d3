"""Error pages in the site's own layout (wired in ``labsite.urls``)."""

from __future__ import annotations

from django.http import HttpRequest, HttpResponse, HttpResponseServerError
from django.shortcuts import render
from django.template import loader


def page_not_found(request: HttpRequest, exception: Exception | None = None) -> HttpResponse:
    return render(request, "errors/404.html", status=404)


def permission_denied(request: HttpRequest, exception: Exception | None = None) -> HttpResponse:
    message = str(exception) if exception is not None and str(exception) else ""
    return render(request, "errors/403.html", {"message": message}, status=403)


def server_error(request: HttpRequest) -> HttpResponse:
    # Rendered without the request: no context processor may touch the database that failed.
    return HttpResponseServerError(loader.get_template("errors/500.html").render({}))
