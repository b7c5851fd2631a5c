"""Vendored static files match their recorded checksums; /docs needs nothing from outside."""

from __future__ import annotations

import hashlib
import re

from fastapi.testclient import TestClient

from server.config import PROJECT_ROOT

VENDOR = PROJECT_ROOT / "static" / "vendor"


def _manifest() -> list[tuple[str, str, str]]:
    rows = []
    for line in (VENDOR / "MANIFEST").read_text().splitlines():
        if line.strip() and not line.startswith("#"):
            package, version, _inner, file, sha = line.split()
            rows.append((f"{package}@{version}", file, sha))
    return rows


def test_every_vendored_file_matches_its_checksum() -> None:
    rows = _manifest()
    assert {file for _, file, _ in rows} == {
        p.name for p in VENDOR.iterdir() if p.name != "MANIFEST"
    }
    for source, file, sha in rows:
        digest = hashlib.sha256((VENDOR / file).read_bytes()).hexdigest()
        assert digest == sha, f"{file} differs from {source}"


def test_htmx_file_is_the_release_the_manifest_names() -> None:
    pinned = next(s.split("@")[1] for s, file, _ in _manifest() if file == "htmx.min.js")
    assert pinned.startswith("2.")  # the 2.x line; 4.x renamed attributes the pages use
    assert f'version:"{pinned}"' in (VENDOR / "htmx.min.js").read_text()


def test_api_docs_load_only_local_files_and_no_inline_script(client: TestClient) -> None:
    page = client.get("/docs")
    assert page.status_code == 200
    sources = re.findall(r'(?:src|href)="([^"]+)"', page.text)
    assert sources
    assert all(s.startswith("/") and not s.startswith("//") for s in sources), sources
    assert re.search(r"<script(?![^>]*\bsrc=)[^>]*>", page.text) is None  # no inline script
    for path in sources:
        if path.startswith("/static/"):
            assert client.get(path).status_code == 200
    assert client.get("/openapi.json").json()["info"]["title"] == "Loadline"
    assert client.get("/redoc").status_code == 404
