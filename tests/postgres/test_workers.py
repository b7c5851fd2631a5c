"""Two uvicorn worker processes on one PostgreSQL database, under concurrent writes.

Many threads create initiatives and change shared ones with the version they read. No answer may
be a server error, every create must be stored exactly once, and a change based on a stale
version must be refused with 409, so no accepted change is ever silently lost.
"""

from __future__ import annotations

import threading
from collections import Counter
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import httpx
import pytest

from tests.conftest import POSTGRES_ADMIN_URL, bearer
from tests.test_faults import PERIOD, running_server

pytestmark = pytest.mark.skipif(not POSTGRES_ADMIN_URL, reason="needs LOADLINE_TEST_POSTGRES_URL")

THREADS = 8
CREATES_PER_THREAD = 5
CHANGES_PER_THREAD = 10  # each change is a read and a PATCH: 5 + 2 * 10 = 25 requests a thread
SHARED_INITIATIVES = 3
REQUEST_TIMEOUT_SECONDS = 30.0


@dataclass
class Tally:
    statuses: Counter[int] = field(default_factory=Counter)
    # initiative id -> (version after the change, title it set) of every accepted PATCH
    accepted: dict[int, list[tuple[int, str]]] = field(default_factory=dict)
    lock: threading.Lock = field(default_factory=threading.Lock)

    def record(self, response: httpx.Response) -> httpx.Response:
        with self.lock:
            self.statuses[response.status_code] += 1
        return response


def _worker_processes(server_pid: int) -> list[int]:
    """The uvicorn worker processes, children of the supervising process (Linux /proc)."""
    children = Path(f"/proc/{server_pid}/task/{server_pid}/children").read_text().split()
    # The supervisor also starts multiprocessing's resource tracker; workers run spawn_main.
    return [
        int(pid) for pid in children if b"spawn_main" in Path(f"/proc/{pid}/cmdline").read_bytes()
    ]


def _work(
    base: str, thread: int, team_id: int, period_id: int, shared: list[int], tally: Tally
) -> list[int]:
    created: list[int] = []
    with httpx.Client(
        base_url=base, headers=bearer("admin"), timeout=REQUEST_TIMEOUT_SECONDS
    ) as api:
        for number in range(CREATES_PER_THREAD):
            body = {
                "team_id": team_id,
                "period_id": period_id,
                "title": f"Thread {thread} item {number}",
                "value": 1 + number,
                "effort": {"likely": 2},
            }
            response = tally.record(api.post("/api/v1/initiatives", json=body))
            if response.status_code == 201:
                created.append(response.json()["id"])
        for number in range(CHANGES_PER_THREAD):
            target = shared[(thread + number) % len(shared)]
            read = tally.record(api.get(f"/api/v1/initiatives/{target}"))
            if read.status_code != 200:
                continue
            title = f"Changed by thread {thread} step {number}"
            change = {"version": read.json()["version"], "title": title}
            response = tally.record(api.patch(f"/api/v1/initiatives/{target}", json=change))
            if response.status_code == 200:
                with tally.lock:
                    tally.accepted.setdefault(target, []).append(
                        (response.json()["version"], title)
                    )
    return created


def test_two_workers_under_concurrent_writes_lose_nothing(database_url: str) -> None:
    tally = Tally()
    with running_server(database_url, workers=2) as (base, process):
        assert len(_worker_processes(process.pid)) == 2
        with httpx.Client(
            base_url=base, headers=bearer("admin"), timeout=REQUEST_TIMEOUT_SECONDS
        ) as api:
            team_id = api.post("/api/v1/teams", json={"name": "Harbour"}).json()["id"]
            period_id = api.post("/api/v1/periods", json=PERIOD).json()["id"]
            shared = []
            start_versions = {}
            for number in range(SHARED_INITIATIVES):
                body = {
                    "team_id": team_id,
                    "period_id": period_id,
                    "title": f"Shared {number}",
                    "value": 5,
                    "effort": {"likely": 3},
                }
                made = api.post("/api/v1/initiatives", json=body)
                assert made.status_code == 201, made.text
                shared.append(made.json()["id"])
                start_versions[shared[-1]] = made.json()["version"]

            with ThreadPoolExecutor(max_workers=THREADS) as pool:
                futures = [
                    pool.submit(_work, base, thread, team_id, period_id, shared, tally)
                    for thread in range(THREADS)
                ]
                created = [item for future in futures for item in future.result(timeout=300)]

            stored = api.get("/api/v1/initiatives", params={"team_id": team_id}).json()
            finals = {target: api.get(f"/api/v1/initiatives/{target}").json() for target in shared}
        # Both workers are still alive after the load (none crashed on a request).
        assert len(_worker_processes(process.pid)) == 2

    assert not [status for status in tally.statuses if status >= 500], tally.statuses
    assert set(tally.statuses) <= {200, 201, 409}, tally.statuses
    assert len(created) == THREADS * CREATES_PER_THREAD
    titles = Counter(item["title"] for item in _items(stored))
    for thread in range(THREADS):
        for number in range(CREATES_PER_THREAD):
            assert titles[f"Thread {thread} item {number}"] == 1
    for target in shared:
        accepted = sorted(tally.accepted.get(target, []))
        versions = [version for version, _ in accepted]
        # Every accepted change made exactly one new version: none overwrote another unseen.
        assert versions == list(range(start_versions[target] + 1, finals[target]["version"] + 1))
        if accepted:
            assert finals[target]["title"] == accepted[-1][1]
    assert sum(len(changes) for changes in tally.accepted.values()) >= 1


def _items(listing: object) -> list[dict[str, object]]:
    """The initiatives of a list answer (a bare list or a page with items)."""
    if isinstance(listing, dict):
        return list(listing["items"])
    assert isinstance(listing, list)
    return listing
