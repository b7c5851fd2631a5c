"""Load test: a room full of browsers against Loadline on 127.0.0.1, bounded in time.

    .venv/bin/python scripts/load_test.py [--users 50] [--seconds 60] [--workers 2]

Starts uvicorn (several workers) on a free loopback port with a temporary SQLite database
holding the demo workspace, an editor account and a published plan. Then each simulated user
loops, until the time is up, over a mix of:
- plan views: the live plan page of a team (HTML, re-solved on every view);
- edits with re-solve: change the value of one initiative of its own (JSON API, with the
  version it read) and read the team's re-solved plan (JSON);
- published-link views: the frozen read-only page.
Each user edits its own initiative, so a 409 would be a real lost-update bug, not contention.
Prints requests per second, the error count and p50/p95/p99 latency, overall and per kind.
Only loopback addresses are ever contacted; the run stops by itself.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import random
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from collections import defaultdict
from pathlib import Path

import httpx

ROOT = Path(__file__).resolve().parent.parent
PYTHON = sys.executable


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def prepare(database_url: str) -> str:
    """Migrate, load the demo, create an editor and return its bearer token."""
    env = {**os.environ, "DATABASE_URL": database_url, "LOADLINE_NEW_PASSWORD": "load-test-pass-1"}
    run = [PYTHON, "-m", "server.cli"]
    subprocess.run([*run, "demo"], check=True, env=env, cwd=ROOT, capture_output=True)
    subprocess.run(
        [*run, "create-user", "loadtest", "--role", "editor"],
        check=True,
        env=env,
        cwd=ROOT,
        capture_output=True,
    )
    out = subprocess.run(
        [*run, "api-token", "loadtest"], check=True, env=env, cwd=ROOT, capture_output=True
    )
    return out.stdout.decode().strip().splitlines()[-1]


def start_server(database_url: str, port: int, workers: int) -> subprocess.Popen[bytes]:
    env = {**os.environ, "DATABASE_URL": database_url, "LOADLINE_SECRET_KEY": "load-test-secret"}
    command = [
        PYTHON, "-m", "uvicorn", "server.serving:app_for_workers", "--factory",
        "--host", "127.0.0.1", "--port", str(port), "--workers", str(workers),
        "--log-level", "warning", "--no-access-log",
    ]  # fmt: skip
    return subprocess.Popen(command, env=env, cwd=ROOT)


async def wait_until_up(base: str, deadline: float) -> None:
    async with httpx.AsyncClient(base_url=base) as client:
        while time.monotonic() < deadline:
            try:
                if (await client.get("/health")).status_code == 200:
                    return
            except httpx.TransportError:
                pass
            await asyncio.sleep(0.2)
    raise RuntimeError("the server did not start in time")


class Stats:
    def __init__(self) -> None:
        self.latency: dict[str, list[float]] = defaultdict(list)
        self.errors: dict[str, int] = defaultdict(int)
        self.error_samples: list[str] = []

    def add(self, kind: str, seconds: float, ok: bool, detail: str = "") -> None:
        self.latency[kind].append(seconds)
        if not ok:
            self.errors[kind] += 1
            if len(self.error_samples) < 5:
                self.error_samples.append(f"{kind}: {detail}")


async def timed(stats: Stats, kind: str, request: object) -> httpx.Response | None:
    start = time.perf_counter()
    try:
        response = await request  # type: ignore[misc]
    except httpx.HTTPError as exc:
        stats.add(kind, time.perf_counter() - start, False, repr(exc))
        return None
    ok = response.status_code < 400
    stats.add(
        kind, time.perf_counter() - start, ok, f"{response.status_code} {response.text[:120]}"
    )
    return response


async def user(
    base: str,
    token: str,
    initiative: dict,
    publication: str,
    stop_at: float,
    stats: Stats,
    think: float,
) -> None:
    rng = random.Random(initiative["id"])
    headers = {"Authorization": f"Bearer {token}"}
    team, period = initiative["team_id"], initiative["period_id"]
    version = initiative["version"]
    async with httpx.AsyncClient(base_url=base, headers=headers, timeout=10) as client:
        while time.monotonic() < stop_at:
            if think:  # a person reads the page before the next action: 0.5x to 1.5x think
                await asyncio.sleep(
                    min(think * (0.5 + rng.random()), max(0.0, stop_at - time.monotonic()))
                )
            roll = rng.random()
            if roll < 0.5:
                await timed(
                    stats, "plan view", client.get(f"/teams/{team}/plan?period_id={period}")
                )
            elif roll < 0.75:
                body = {"version": version, "value": rng.randint(5, 95)}
                edited = await timed(
                    stats,
                    "edit",
                    client.patch(f"/api/v1/initiatives/{initiative['id']}", json=body),
                )
                if edited is not None and edited.status_code == 200:
                    version = edited.json()["version"]
                await timed(
                    stats,
                    "re-solve",
                    client.get(f"/api/v1/teams/{team}/periods/{period}/plan"),
                )
            else:
                await timed(stats, "published view", client.get(f"/p/{publication}"))


def percentile(values: list[float], q: float) -> float:
    return (
        statistics.quantiles(values, n=100, method="inclusive")[q - 1]
        if len(values) > 1
        else values[0]
    )


def report(stats: Stats, seconds: float, users: int, workers: int, think: float) -> int:
    everything = [v for values in stats.latency.values() for v in values]
    errors = sum(stats.errors.values())
    print(f"\n{users} users, {workers} uvicorn workers, {seconds:.0f} s on 127.0.0.1")
    print(f"think time between actions: {think:g} s on average")
    print(f"{'kind':<16}{'requests':>10}{'errors':>8}{'p50 ms':>9}{'p95 ms':>9}{'p99 ms':>9}")
    for kind, values in [*sorted(stats.latency.items()), ("all", everything)]:
        err = errors if kind == "all" else stats.errors.get(kind, 0)
        print(
            f"{kind:<16}{len(values):>10}{err:>8}"
            f"{percentile(values, 50) * 1000:>9.1f}{percentile(values, 95) * 1000:>9.1f}"
            f"{percentile(values, 99) * 1000:>9.1f}"
        )
    print(f"requests per second: {len(everything) / seconds:.1f}; errors: {errors}")
    for sample in stats.error_samples:
        print("  error:", sample)
    return 1 if errors else 0


async def main_async(args: argparse.Namespace) -> int:
    workdir = Path(tempfile.mkdtemp(prefix="loadline-load-"))
    database_url = f"sqlite:///{workdir / 'load.db'}"
    token = prepare(database_url)
    port = free_port()
    base = f"http://127.0.0.1:{port}"
    server = start_server(database_url, port, args.workers)
    try:
        await wait_until_up(base, time.monotonic() + 30)
        headers = {"Authorization": f"Bearer {token}"}
        async with httpx.AsyncClient(base_url=base, headers=headers, timeout=30) as client:
            periods = (await client.get("/api/v1/periods")).json()
            quarter = next(p for p in periods if p["kind"] == "quarter")
            initiatives = (
                await client.get(f"/api/v1/initiatives?period_id={quarter['id']}")
            ).json()
            saved = await client.post(
                "/api/v1/plans",
                json={
                    "name": "Load test",
                    "team_id": initiatives[0]["team_id"],
                    "period_id": quarter["id"],
                },
            )
            saved.raise_for_status()
            published = await client.post(f"/api/v1/plans/{saved.json()['id']}/publications")
            published.raise_for_status()
            publication = published.json()["token"]
            candidates = [i for i in initiatives if i["state"] == "candidate"]
            # One initiative per user, so that no two users ever edit the same one.
            for n in range(len(candidates), args.users):
                made = await client.post(
                    "/api/v1/initiatives",
                    json={
                        "team_id": candidates[n % len(candidates)]["team_id"],
                        "period_id": quarter["id"],
                        "title": f"Load test initiative {n}",
                        "effort": 2 + n % 7,
                        "value": 5 + n % 11,
                    },
                )
                made.raise_for_status()
                candidates.append(made.json())
        stats = Stats()
        started = time.monotonic()
        stop_at = started + args.seconds
        await asyncio.gather(
            *(
                user(base, token, candidates[n], publication, stop_at, stats, args.think)
                for n in range(args.users)
            )
        )
        return report(stats, time.monotonic() - started, args.users, args.workers, args.think)
    finally:
        server.terminate()
        try:
            server.wait(timeout=15)
        except subprocess.TimeoutExpired:
            server.kill()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--users", type=int, default=50)
    parser.add_argument("--seconds", type=float, default=60)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument(
        "--think",
        type=float,
        default=0.0,
        help="mean seconds a user waits between actions (0: none, the saturation test)",
    )
    args = parser.parse_args()
    if not 1 <= args.users <= 500 or not 1 <= args.seconds <= 600:
        parser.error("use 1-500 users and 1-600 seconds")
    return asyncio.run(main_async(args))


if __name__ == "__main__":
    raise SystemExit(main())
