"""Process settings for serving: fewer full garbage collections during live editing.

A full collection walks every object the process holds (about 240,000 after start), which
showed up as the slow tail of an edit-and-re-solve in scripts/bench_edit.py. Objects that
exist once the app is built are moved out of the collector's sight, and the first threshold is
raised so that short-lived request objects are collected in larger, rarer batches.
"""

from __future__ import annotations

import gc

from fastapi import FastAPI

from server.app import create_app

FIRST_GENERATION_THRESHOLD = 50_000


def tune_garbage_collection() -> None:
    gc.collect()
    gc.freeze()
    gc.set_threshold(FIRST_GENERATION_THRESHOLD, 20, 20)


def app_for_workers() -> FastAPI:
    """Factory for `uvicorn --factory server.serving:app_for_workers` (one per worker)."""
    app = create_app()
    tune_garbage_collection()
    return app
