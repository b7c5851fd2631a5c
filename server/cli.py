"""The `loadline` command: serve, migrate, load the demo workspace, run the selector on a CSV."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable

from server.config import Settings
from server.errors import LoadlineError


def _serve(args: argparse.Namespace) -> int:
    import uvicorn
    from sqlmodel import Session

    from server import demo, migrate
    from server.app import create_app
    from server.serving import tune_garbage_collection
    from server.store.users import count_users

    settings = Settings.from_env()
    migrate.upgrade(settings)
    app = create_app(settings)
    if not args.no_demo:
        loaded = demo.load_if_empty(app.state.engine)
        print("Loaded the demo workspace." if loaded else "Database has data; demo not loaded.")
    with Session(app.state.engine) as session:
        if count_users(session) == 0:
            print("No accounts yet: open the address below on this machine to create the first")
            print("administrator (or run: loadline create-user NAME --role admin).")
    tune_garbage_collection()
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
    try:
        loaded = demo.load_if_empty(engine)
    finally:
        engine.dispose()
    if loaded:
        print("Loaded the demo workspace.")
        return 0
    print("The database already has teams or periods; the demo loads only into an empty one.")
    return 1


def _backup(args: argparse.Namespace) -> int:
    from pathlib import Path

    from server.backup import backup_sqlite

    path = backup_sqlite(Settings.from_env().database_url, Path(args.destination))
    print(f"Backed up to {path} (integrity check passed).")
    return 0


def _export_workspace(args: argparse.Namespace) -> int:
    from pathlib import Path

    from server.backup import write_export
    from server.db import make_engine

    path = write_export(make_engine(Settings.from_env()), Path(args.destination))
    print(f"Workspace exported to {path}.")
    return 0


def _restore_workspace(args: argparse.Namespace) -> int:
    from pathlib import Path

    from server import migrate
    from server.backup import read_export, restore_workspace
    from server.db import make_engine

    settings = Settings.from_env()
    migrate.upgrade(settings)
    counts = restore_workspace(make_engine(settings), read_export(Path(args.source)))
    print(f"Restored {sum(counts.values())} rows into {len(counts)} tables.")
    return 0


def _create_user(args: argparse.Namespace) -> int:
    import getpass
    import os

    from sqlmodel import Session

    from server import migrate
    from server.db import make_engine
    from server.store.users import create_user

    settings = Settings.from_env()
    migrate.upgrade(settings)
    password = os.environ.get("LOADLINE_NEW_PASSWORD") or getpass.getpass("Password: ")
    with Session(make_engine(settings)) as session:
        user = create_user(session, username=args.username, password=password, role=args.role)
        print(f"Created {user.role} “{user.username}”.")
    return 0


def _api_token(args: argparse.Namespace) -> int:
    from sqlmodel import Session

    from server.db import make_engine
    from server.errors import NotFoundError
    from server.store.users import API_TOKEN_DAYS, find_user, start_session

    with Session(make_engine(Settings.from_env())) as session:
        user = find_user(session, username=args.username)
        if user is None:
            raise NotFoundError(f"No user named “{args.username}”.", field="username")
        name, role = user.username, user.role
        token = start_session(session, user=user, api_token=True)
    print(f"Bearer token for “{name}” ({role}), valid {API_TOKEN_DAYS} days:")
    print(token)
    return 0


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

    backup = commands.add_parser("backup", help="consistent copy of the live SQLite database")
    backup.add_argument("destination")
    backup.set_defaults(handler=_backup)

    export = commands.add_parser("export-workspace", help="write the whole workspace as JSON")
    export.add_argument("destination")
    export.set_defaults(handler=_export_workspace)

    restore = commands.add_parser(
        "restore-workspace", help="load a JSON workspace export into an empty database"
    )
    restore.add_argument("source")
    restore.set_defaults(handler=_restore_workspace)

    user = commands.add_parser(
        "create-user", help="create an account (password from LOADLINE_NEW_PASSWORD or a prompt)"
    )
    user.add_argument("username")
    user.add_argument("--role", choices=["admin", "editor", "viewer"], default="admin")
    user.set_defaults(handler=_create_user)

    token = commands.add_parser("api-token", help="print a bearer token for an account")
    token.add_argument("username")
    token.set_defaults(handler=_api_token)

    args = parser.parse_args(argv)
    handler: Callable[[argparse.Namespace], int] = args.handler
    from sqlalchemy.exc import OperationalError, ProgrammingError

    try:
        return handler(args)
    except LoadlineError as exc:
        print(f"loadline: {exc.message}", file=sys.stderr)
        return 2
    except (OperationalError, ProgrammingError) as exc:
        # A missing table or an unreachable server: say so in one line, not a traceback.
        reason = str(exc.orig).splitlines()[0] if exc.orig is not None else type(exc).__name__
        print(
            f"loadline: the database is not ready ({reason}). Check DATABASE_URL, and run "
            "'loadline migrate' to create or update its tables.",
            file=sys.stderr,
        )
        return 2


if __name__ == "__main__":
    raise SystemExit(main())
