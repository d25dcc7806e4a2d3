"""The report pages are reachable from the rest of the site, and the revision page loads Plotly
(under the response's CSP nonce) for its ``data-figure`` charts."""

from __future__ import annotations

import html
import json
import re
from typing import Any

from django.contrib.auth.models import User
from django.test import Client
from django.urls import reverse

from reports.models import ReportRevision
from testing.models import DirectShearTest
from tests.conftest import Cast


def _get(user: User, url: str) -> Any:
    client = Client()
    client.force_login(user)
    response = client.get(url)
    assert response.status_code == 200, url
    return response


def _nav(text: str) -> str:
    match = re.search(r'<nav aria-label="Main">.*?</nav>', text, re.S)
    assert match is not None
    return match.group(0)


def test_revision_page_loads_plotly_with_the_nonce_and_embeds_each_figure(
    cast: Cast, draft: ReportRevision
) -> None:
    page = _get(cast.technician, reverse("reports:revision", args=[draft.pk]))
    text = page.content.decode()
    nonce = re.search(r"'nonce-([^']+)'", page["Content-Security-Policy"])
    assert nonce is not None
    scripts = re.findall(r"<script\b[^>]*>", text)
    assert any("plotly" in tag and f'nonce="{nonce.group(1)}"' in tag for tag in scripts), scripts
    assert all(f'nonce="{nonce.group(1)}"' in tag for tag in scripts), scripts
    figures = [json.loads(html.unescape(f)) for f in re.findall(r'data-figure="([^"]*)"', text)]
    # A three-stage set: shear, dilation, consolidation and envelope charts, each with data.
    assert len(figures) >= 4
    assert all(figure["data"] for figure in figures)
    from testing.views.common import CAUTION

    assert html.escape(CAUTION) in text  # the results caution beside the charts
    nav = _nav(text)
    assert f'href="{reverse("reports:list")}" aria-current="page">Reports<' in nav


def test_test_set_page_links_preparers_to_a_new_report_of_that_set(
    cast: Cast, computed_set: DirectShearTest
) -> None:
    url = reverse("test-detail", args=[computed_set.pk])
    create = (
        f"{reverse('reports:create')}?project={computed_set.project_id}&amp;tests={computed_set.pk}"
    )
    for user in (cast.technician, cast.manager):
        assert create in _get(user, url).content.decode()
    for user in (cast.checker, cast.approver):  # they sign reports; they do not prepare them
        assert "Create report" not in _get(user, url).content.decode()
    # The link opens the form with this set already ticked.
    form = _get(cast.technician, html.unescape(create)).content.decode()
    ticked = re.findall(r"<input[^>]*checked[^>]*>", form)
    assert len(ticked) == 1 and f'value="{computed_set.pk}"' in ticked[0], ticked


def test_navigation_offers_reports_to_staff_and_the_portal_to_clients(cast: Cast) -> None:
    staff_nav = _nav(_get(cast.checker, reverse("worklist")).content.decode())
    assert f'href="{reverse("reports:list")}"' in staff_nav
    assert reverse("portal:home") not in staff_nav
    client_nav = _nav(_get(cast.client_a, reverse("portal:home")).content.decode())
    assert (
        f'href="{reverse("portal:home")}" aria-current="page">Your projects and reports<'
        in client_nav
    )
    assert reverse("reports:list") not in client_nav
