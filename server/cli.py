"""The `loadline` command: serve, migrate, load the demo workspace, run the selector on a CSV."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable

from server.config import Settings


def _serve(args: argparse.Namespace) -> int:
    import uvicorn

    from server import demo, migrate
    from server.app import create_app

    settings = Settings.from_env()
    migrate.upgrade(settings)
    app = create_app(settings)
    if not args.no_demo:
        loaded = demo.load_if_empty(app.state.engine)
        print("Loaded the demo workspace." if loaded else "Database has data; demo not loaded.")
    print(f"Loadline is running on http://{args.host}:{args.port}  (Ctrl+C stops it)", flush=True)
    uvicorn.run(app, host=args.host, port=args.port, log_level="warning")
    return 0


def _migrate(args: argparse.Namespace) -> int:
    from server import migrate

    settings = Settings.from_env()
    if args.revision.startswith("-") or args.down:
        migrate.downgrade(settings, args.revision)
    else:
        migrate.upgrade(settings, args.revision)
    print(f"Database at revision {args.revision}.")
    return 0


def _demo(args: argparse.Namespace) -> int:
    from server import demo, migrate
    from server.db import make_engine

    settings = Settings.from_env()
    migrate.upgrade(settings)
    engine = make_engine(settings)
    if demo.load_if_empty(engine):
        print("Loaded the demo workspace.")
        return 0
    print("The database already has teams or periods; the demo loads only into an empty one.")
    return 1


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    if argv and argv[0] == "select":  # the selector parses its own arguments
        from server.selector.cli import main as select_main

        return select_main(argv[1:])
    parser = argparse.ArgumentParser(prog="loadline", description="Loadline planning server.")
    commands = parser.add_subparsers(dest="command", required=True)

    serve = commands.add_parser("serve", help="migrate, load the demo if empty, serve the app")
    serve.add_argument("--host", default="127.0.0.1")
    serve.add_argument("--port", type=int, default=8000)
    serve.add_argument("--no-demo", action="store_true", help="do not load the demo workspace")
    serve.set_defaults(handler=_serve)

    mig = commands.add_parser("migrate", help="apply database migrations")
    mig.add_argument("revision", nargs="?", default="head")
    mig.add_argument("--down", action="store_true", help="downgrade to the revision")
    mig.set_defaults(handler=_migrate)

    demo = commands.add_parser("demo", help="load the demo workspace into an empty database")
    demo.set_defaults(handler=_demo)

    commands.add_parser(
        "select", help="plan a CSV of initiatives: loadline select FILE --capacity DAYS"
    )

    args = parser.parse_args(argv)
    handler: Callable[[argparse.Namespace], int] = args.handler
    return handler(args)


if __name__ == "__main__":
    raise SystemExit(main())
