"""``manage.py recompute_results``: re-run stage reductions (and envelopes) with the current algorithm.

Results are only ever added: identical inputs under the same algorithm version reuse the stored
result, and report revisions keep pointing at the rows they froze, so issued numbers never change.
"""

from __future__ import annotations

from datetime import date
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser

from testing import analysis
from testing.models import DirectShearTest
from testing.services.computation import test_recompute_request


class Command(BaseCommand):
    help = "Queue a recomputation of test sets' stages and envelopes with the current algorithm."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument(
            "--since",
            type=date.fromisoformat,
            help="Only test sets requested on or after this date (YYYY-MM-DD).",
        )
        parser.add_argument(
            "--test", dest="reference", help="Only this test set (its reference, e.g. DS-01)."
        )

    def handle(
        self, *args: Any, since: date | None = None, reference: str | None = None, **options: Any
    ) -> None:
        tests = DirectShearTest.objects.order_by("project__reference", "reference")
        if since is not None:
            tests = tests.filter(requested_on__gte=since)
        if reference:
            tests = tests.filter(reference=reference)
            if not tests.exists():
                raise CommandError(f"No test set with reference {reference!r}.")
        count = 0
        for test in tests:
            runs = test_recompute_request(
                test=test, user=None, reason=f"recompute with algorithm {analysis.ANALYSIS_VERSION}"
            )
            count += len(runs)
            self.stdout.write(f"{test}: {len(runs)} stage run(s) queued")
        self.stdout.write(f"{count} run(s) queued; existing and issued results are kept unchanged.")
