"""The reports app calls this when a signed report first releases a test set to the client."""

from __future__ import annotations

from datetime import datetime

from testing.models import DirectShearTest


def test_mark_released(*, test: DirectShearTest, at: datetime) -> bool:
    """Set ``released_at`` once. Returns False if it was already released (the first date stands)."""
    changed = DirectShearTest.objects.filter(pk=test.pk, released_at__isnull=True).update(
        released_at=at
    )
    if changed:
        test.released_at = at
    return bool(changed)
