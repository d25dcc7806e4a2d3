"""Load test: 50 concurrent clients for 60 s against gunicorn + PostgreSQL + a Celery worker.

Starts the topology (``scripts/topology.py``: own redis-server, scratch PostgreSQL database, demo
data, gunicorn with 3 workers, 1 Celery worker) unless ``--url`` points at a running one. Each
client is a bounded loop with a short think time (0.25–0.75 s, seeded), one of three kinds:

- portal reader: signed in as ``client-a`` (session), reads the portal and its own API lists;
- API reader: ``technician`` token, reads ``/api/v1/`` lists (samples, test sets, stage results);
- staff writer: ``technician`` token, mostly reads, one request in five queues a recompute of a
  demo test set (``POST /api/v1/test-sets/<id>/recompute/``), which the Celery worker carries out.

Prints requests, failures, requests per second and p50/p95/p99 latency; exits 1 on any failed
request (unexpected status or transport error) or if p99 is over the budget kept in
``benchmarks/loadtest_budget.json``. ``--record`` appends this run's p99 to that file's baseline
runs instead of gating (the budget is 1.5 × the slowest of three baseline p99s).

The API throttle is raised for the run (``TAULINE_API_USER_RATE``): every API client here shares
two accounts, which a real lab would not.

    .venv/bin/python scripts/loadtest.py [--clients 50] [--duration 60] [--url http://...]
"""

from __future__ import annotations

import argparse
import asyncio
import json
import random
import re
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import aiohttp

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

BUDGET_FILE = ROOT / "benchmarks" / "loadtest_budget.json"
BUDGET_FACTOR = 1.5  # headroom over the slowest baseline p99, for a shared 2 vCPU machine
PASSWORD_ENV = "TAULINE_DEMO_PASSWORD"
CSRF = re.compile(r'name="csrfmiddlewaretoken" value="([^"]+)"')


@dataclass
class Tally:
    latencies_ms: list[float] = field(default_factory=list)
    failures: list[str] = field(default_factory=list)
    by_kind: dict[str, int] = field(default_factory=dict)
    sent: int = 0


async def timed(
    session: aiohttp.ClientSession,
    tally: Tally,
    kind: str,
    method: str,
    url: str,
    expect: int,
    **kwargs: Any,
) -> Any:
    tally.sent += 1
    start = time.perf_counter()
    try:
        async with session.request(method, url, allow_redirects=False, **kwargs) as response:
            body = await response.read()
            status = response.status
    except (aiohttp.ClientError, TimeoutError) as exc:
        tally.failures.append(f"{method} {url}: {type(exc).__name__} {exc}")
        return None
    tally.latencies_ms.append(1000 * (time.perf_counter() - start))
    tally.by_kind[kind] = tally.by_kind.get(kind, 0) + 1
    if status != expect:
        tally.failures.append(f"{method} {url}: {status} (expected {expect}) {body[:200]!r}")
        return None
    return body


async def login(session: aiohttp.ClientSession, base: str, username: str, password: str) -> None:
    async with session.get(f"{base}/accounts/login/") as response:
        page = await response.text()
    match = CSRF.search(page)
    if match is None:
        raise RuntimeError("no CSRF token on the sign-in page")
    async with session.post(
        f"{base}/accounts/login/",
        data={"username": username, "password": password, "csrfmiddlewaretoken": match[1]},
        headers={"Referer": f"{base}/accounts/login/"},
        allow_redirects=False,
    ) as response:
        if response.status != 302:
            raise RuntimeError(f"sign-in as {username} answered {response.status}")


async def token(base: str, username: str, password: str) -> str:
    async with (
        aiohttp.ClientSession() as session,
        session.post(
            f"{base}/api/v1/auth/token/", json={"username": username, "password": password}
        ) as response,
    ):
        if response.status != 200:
            raise RuntimeError(f"token for {username}: {response.status} {await response.text()}")
        value: str = (await response.json())["token"]
        return value


async def open_client(index: int, base: str, setup: dict[str, Any]) -> aiohttp.ClientSession:
    """A client's own session (cookies from 127.0.0.1 accepted); portal readers sign in."""
    headers: dict[str, str] = {}
    if index % 3:
        headers["Authorization"] = f"Token {setup['tech_token']}"
    session = aiohttp.ClientSession(
        cookie_jar=aiohttp.CookieJar(unsafe=True),
        timeout=aiohttp.ClientTimeout(total=30),
        headers=headers,
    )
    if index % 3 == 0:
        await login(session, base, "client-a", setup["password"])
    return session


async def client_loop(
    index: int,
    s: aiohttp.ClientSession,
    base: str,
    deadline: float,
    tally: Tally,
    setup: dict[str, Any],
) -> None:
    rng = random.Random(index)
    kind = ("portal", "api", "staff")[index % 3]
    while time.monotonic() < deadline:
        if kind == "portal":
            url = rng.choice(["/portal/", "/api/v1/projects/", "/api/v1/test-sets/"])
            await timed(s, tally, "portal read", "GET", base + url, 200)
        elif kind == "api" or rng.random() >= 0.2:
            url = rng.choice(["/api/v1/samples/", "/api/v1/test-sets/", "/api/v1/stage-results/"])
            await timed(s, tally, "API read", "GET", base + url, 200)
        else:
            test_id = rng.choice(setup["test_ids"])
            await timed(
                s,
                tally,
                "staff write",
                "POST",
                f"{base}/api/v1/test-sets/{test_id}/recompute/",
                202,
                json={"reason": "load test"},
            )
        await asyncio.sleep(rng.uniform(0.25, 0.75))


async def run(base: str, clients: int, duration_s: float, password: str) -> Tally:
    tech_token = await token(base, "technician", password)
    async with (
        aiohttp.ClientSession(headers={"Authorization": f"Token {tech_token}"}) as s,
        s.get(f"{base}/api/v1/test-sets/") as response,
    ):
        listing = await response.json()
    test_ids = [row["id"] for row in listing["results"]]
    if not test_ids:
        raise RuntimeError("no test sets to recompute: is the demo loaded?")
    setup = {"tech_token": tech_token, "password": password, "test_ids": test_ids}
    # Sign-ins first (not timed), then every client starts together.
    sessions = await asyncio.gather(*(open_client(i, base, setup) for i in range(clients)))
    tally = Tally()
    deadline = time.monotonic() + duration_s
    try:
        await asyncio.gather(
            *(client_loop(i, s, base, deadline, tally, setup) for i, s in enumerate(sessions))
        )
    finally:
        for session in sessions:
            await session.close()
    return tally


def percentile(values: list[float], q: float) -> float:
    """Linear-interpolated percentile (numpy's default method)."""
    ordered = sorted(values)
    if not ordered:
        return float("nan")
    pos = (len(ordered) - 1) * q / 100
    low = int(pos)
    high = min(low + 1, len(ordered) - 1)
    return ordered[low] + (ordered[high] - ordered[low]) * (pos - low)


def load_budget() -> dict[str, Any]:
    if BUDGET_FILE.exists():
        data: dict[str, Any] = json.loads(BUDGET_FILE.read_text())
        return data
    return {"p99_ms": None, "baseline_p99_ms": []}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--clients", type=int, default=50)
    parser.add_argument("--duration", type=float, default=60.0, help="seconds")
    parser.add_argument("--url", default=None, help="a running Tauline; else the topology starts")
    parser.add_argument("--web-workers", type=int, default=3)
    parser.add_argument("--celery-workers", type=int, default=1)
    parser.add_argument("--record", action="store_true", help="record a baseline run; no gate")
    parser.add_argument("--no-budget", action="store_true", help="no p99 gate (smoke runs)")
    args = parser.parse_args(argv)

    import os

    password = os.environ.get(PASSWORD_ENV, "tauline-demo")
    if args.url:
        tally = asyncio.run(run(args.url.rstrip("/"), args.clients, args.duration, password))
    else:
        from scripts.topology import Topology

        with Topology(
            web_workers=args.web_workers,
            celery_workers=args.celery_workers,
            extra_env={"TAULINE_API_USER_RATE": "1000000/hour", PASSWORD_ENV: password},
        ) as top:
            print(f"# topology at {top.url} (logs in {top.dir})", file=sys.stderr)
            tally = asyncio.run(run(top.url, args.clients, args.duration, password))
    return report(tally, args)


def report(tally: Tally, args: argparse.Namespace) -> int:
    lat = tally.latencies_ms
    n = tally.sent
    p50, p95, p99 = (percentile(lat, q) for q in (50, 95, 99))
    kinds = ", ".join(f"{k} {v}" for k, v in sorted(tally.by_kind.items()))
    print(
        f"loadtest: {args.clients} clients, {args.duration:g} s: {n} requests ({kinds}), "
        f"{len(tally.failures)} failed, {len(lat) / args.duration:.1f} req/s; "
        f"p50 {p50:.0f} ms, p95 {p95:.0f} ms, p99 {p99:.0f} ms"
    )
    for failure in tally.failures[:10]:
        print(f"  failed: {failure}", file=sys.stderr)
    budget = load_budget()
    if args.record:
        budget["baseline_p99_ms"] = [*budget.get("baseline_p99_ms", []), round(p99, 1)][-3:]
        budget["p99_ms"] = round(BUDGET_FACTOR * max(budget["baseline_p99_ms"]), 0)
        budget["rule"] = (
            f"p99_ms = {BUDGET_FACTOR:g} x the slowest of the last three baseline runs "
            f"({args.clients} clients, {args.duration:g} s, 3 gunicorn workers, 1 Celery worker)"
        )
        BUDGET_FILE.write_text(json.dumps(budget, indent=2) + "\n")
        print(f"# recorded; budget now p99 <= {budget['p99_ms']:g} ms", file=sys.stderr)
    ok = not tally.failures
    if not args.record and not args.no_budget:
        limit = budget.get("p99_ms")
        if limit is None:
            print("loadtest: no budget recorded (run three times with --record)", file=sys.stderr)
            ok = False
        elif p99 > limit:
            print(f"loadtest: p99 {p99:.0f} ms over the budget {limit:g} ms", file=sys.stderr)
            ok = False
        else:
            print(f"loadtest: p99 within the budget {limit:g} ms")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
