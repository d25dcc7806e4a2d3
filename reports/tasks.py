"""Background work for reports: render, sign and store an issued revision (queue "reports")."""

from __future__ import annotations

from celery import shared_task

from reports import services


# Routed to "reports". No result backend: the revision's state is the result, and waiting on a
# result store would make a publish hang while Redis is down.
@shared_task(name="reports.render_revision", acks_late=True, ignore_result=True)
def render_revision(revision_id: int) -> str:
    """Safe to run twice: only a revision still being issued is rendered and stored."""
    done = services.revision_issue_complete(revision_id=revision_id)
    return "issued" if done is not None else "nothing to do"
