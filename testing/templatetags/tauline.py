"""Template helpers for the staff pages."""

from __future__ import annotations

from django import template
from django.urls import reverse
from django.utils.html import format_html, format_html_join

from testing import access, analysis
from testing.access import AnyUser
from testing.views.assets import plotly_style_ids, plotly_version
from testing.views.common import optional_url

register = template.Library()


@register.simple_tag
def plotly_src() -> str:
    """The versioned URL of the Plotly bundle from the installed package."""
    return reverse("plotly-js", args=[plotly_version()])


@register.simple_tag(takes_context=True)
def plotly_scripts(context: template.Context) -> str:
    """The Plotly bundle's script tag and the empty style elements it writes into (see
    :func:`testing.views.assets.plotly_style_ids`), all carrying this response's CSP nonce."""
    request = context.get("request")
    nonce = str(getattr(request, "csp_nonce", "")) if request is not None else ""
    styles = format_html_join(
        "",
        '<style id="{}" nonce="{}"></style>',
        ((style_id, nonce) for style_id in plotly_style_ids()),
    )
    script = format_html('<script src="{}" nonce="{}"></script>', plotly_src(), nonce)
    return format_html("{}{}", styles, script)


@register.simple_tag
def maybe_url(name: str, *args: object) -> str:
    """A URL by name, or "" when the page does not exist (an optional app's page)."""
    return optional_url(name, *args) or ""


@register.filter
def is_lab_staff(user: AnyUser) -> bool:
    return access.is_lab_staff(user)


@register.filter
def is_manager(user: AnyUser) -> bool:
    return access.can_manage(user)


@register.filter
def can_enter_readings(user: AnyUser) -> bool:
    """Technicians and the lab manager: they enter data and prepare reports."""
    return access.can_enter_readings(user)


@register.filter
def criterion_label(code: str) -> str:
    """The failure criterion in words (as stored, AGS SHBT_CRIT style codes)."""
    return analysis.CRITERION_LABELS.get(code, code)
