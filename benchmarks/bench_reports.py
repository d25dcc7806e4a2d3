"""Render and sign a 3-stage report; compare with a bare WeasyPrint document of the same pages
and charts.

Baseline: WeasyPrint alone turning a finished copy of the report's HTML (same pages, tables and
chart SVGs, built beforehand) into PDF, in the same run. Measured: everything issuing does — the
queries of the context builder, the charts (matplotlib SVG), the HTML, WeasyPrint, and the PAdES
signature. Target: ratio <= 1.5 and the whole under 3 s. The same HTML with each chart replaced
by an empty box is also timed and printed, to show what the charts cost WeasyPrint.

Run: .venv/bin/python benchmarks/bench_reports.py
"""

from __future__ import annotations

import os
import re
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")
_tmp = tempfile.TemporaryDirectory(prefix="tauline-bench-")
os.environ["DATABASE_URL"] = f"sqlite:///{_tmp.name}/bench.sqlite3"
os.environ["MEDIA_ROOT"] = _tmp.name
os.environ.pop("REDIS_URL", None)

import django  # noqa: E402

django.setup()

from django.core.management import call_command  # noqa: E402

TARGET_RATIO = 1.5
TARGET_SECONDS = 3.0
SMOKE = "--smoke" in sys.argv  # tiny sizes, no target: checks that the benchmark still runs
REPEATS = 1 if SMOKE else 5  # medians of 5: one slow run on a busy machine does not decide


def main() -> int:
    call_command("migrate", verbosity=0)
    from django.contrib.auth.models import User
    from django.db import transaction

    from reports import services, signing
    from reports.rendering.context import build_content, report_tests_load
    from reports.rendering.html import render_report_html
    from reports.rendering.pdf import html_to_pdf
    from testing.models import DirectShearTest
    from testing.services import computation
    from testing.services.demo import load_demo

    load_demo()
    test = DirectShearTest.objects.get(reference="DS-01")
    technician = User.objects.get(username="technician")
    if not test.envelopes.exists():
        for _ in range(4):
            with transaction.atomic():
                computation.test_recompute_request(test=test, user=technician, reason="benchmark")
            if test.envelopes.exists():
                break
    revision = services.report_create(user=technician, project=test.project, tests=[test])
    signing.make_lab_certificate()

    def full() -> bytes:
        # The context builder with its queries (as issuing re-freezes a draft), then the charts,
        # the HTML, WeasyPrint and the signature.
        build_content(
            tests=report_tests_load([test.pk]),
            report_number=revision.report.number,
            revision_number=revision.number,
            revision_id=str(revision.public_id),
            title=revision.title,
            remarks=revision.remarks,
            deviations=revision.deviations,
        )
        html = render_report_html(revision)
        return signing.sign_pdf(html_to_pdf(html), reason="bench", signer_name="Bench")

    html = render_report_html(revision)
    bare_html = re.sub(
        r'<img alt="[^"]*" src="data:image/svg\+xml;base64,[^"]*">',
        '<div style="width:100%;height:82mm;border:0.4pt solid #999"></div>',
        html,
        flags=re.S,
    )

    def bare() -> bytes:
        return html_to_pdf(html)

    def boxes() -> bytes:
        return html_to_pdf(bare_html)

    full(), bare(), boxes()  # warm up: fonts, imports
    if os.environ.get("BENCH_PROFILE"):
        from reports.rendering.charts import report_charts, to_svg

        t0 = time.perf_counter()
        charts = [to_svg(c) for t in revision.content["tests"] for c in report_charts(t).values()]
        t1 = time.perf_counter()
        pdf0 = html_to_pdf(html)
        t2 = time.perf_counter()
        signing.sign_pdf(pdf0, reason="bench", signer_name="Bench")
        t3 = time.perf_counter()
        print(
            f"charts {t1 - t0:.3f} s ({len(charts)}, {sum(map(len, charts))} chars); weasyprint {t2 - t1:.3f} s; sign {t3 - t2:.3f} s"
        )
    full_times, bare_times, box_times = [], [], []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        boxes()
        box_times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        pdf = full()
        full_times.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        base = bare()
        bare_times.append(time.perf_counter() - t0)
    import io

    from pypdf import PdfReader

    pages_full, pages_bare = (
        len(PdfReader(io.BytesIO(pdf)).pages),
        len(PdfReader(io.BytesIO(base)).pages),
    )
    value, baseline = statistics.median(full_times), statistics.median(bare_times)
    ratio = value / baseline
    print(
        f"bench reports: {value:.3f} s; baseline {baseline:.3f} s; ratio {ratio:.2f} (target <= {TARGET_RATIO:g})"
        f"  [render+charts+sign, {pages_full} pages vs bare WeasyPrint {pages_bare} pages;"
        f" charts as empty boxes {statistics.median(box_times):.3f} s]"
    )
    ok = ratio <= TARGET_RATIO and value <= TARGET_SECONDS
    if not ok:
        print(
            f"bench reports: target missed (ratio <= {TARGET_RATIO:g} and time <= {TARGET_SECONDS:g} s)"
        )
    return 0 if ok or SMOKE else 1


if __name__ == "__main__":
    sys.exit(main())
