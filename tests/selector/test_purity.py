"""The selector imports nothing from the web or database layers (checked in a fresh process)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

FORBIDDEN = (
    "fastapi",
    "starlette",
    "sqlmodel",
    "sqlalchemy",
    "jinja2",
    "server.models",
    "server.db",
    "server.routes",
)
ROOT = Path(__file__).resolve().parents[2]

PROBE = """
import importlib, pkgutil, sys
import server.selector as package
names = sorted(m.name for m in pkgutil.iter_modules(package.__path__, "server.selector."))
for name in names:
    importlib.import_module(name)
print(len(names))
print(" ".join(sorted(sys.modules)))
"""


def test_selector_imports_no_web_or_database_module() -> None:
    done = subprocess.run(
        [sys.executable, "-c", PROBE], cwd=ROOT, capture_output=True, text=True, check=True
    )
    count_line, modules_line = done.stdout.strip().splitlines()
    assert int(count_line) >= 10  # every module of the package was imported
    loaded = set(modules_line.split())
    offending = sorted(
        name for name in loaded for bad in FORBIDDEN if name == bad or name.startswith(bad + ".")
    )
    assert offending == []
