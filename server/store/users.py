"""Accounts, sign-in sessions and failed sign-in attempts."""

from __future__ import annotations

import datetime as dt
import hashlib
import secrets
from functools import cache

from sqlmodel import Session, col, delete, func, select

from server.errors import ConflictError, InputError
from server.models import LoginFailure, UserAccount, UserSession, utcnow
from server.passwords import hash_password, password_problem, verify_password
from server.store._common import commit_or_conflict, get_or_404

ROLES = ("admin", "editor", "viewer")
SESSION_HOURS = 12
API_TOKEN_DAYS = 365
FAILURE_WINDOW = dt.timedelta(minutes=15)
MAX_FAILURES_PER_ACCOUNT = 5
MAX_FAILURES_PER_ADDRESS = 20


class TooManyAttempts(InputError):  # noqa: N818  (reads as a sentence at the raise)
    status_code = 429


def digest(token: str) -> str:
    return hashlib.sha256(token.encode()).hexdigest()


def count_users(session: Session) -> int:
    return int(session.exec(select(func.count()).select_from(UserAccount)).one())


def list_users(session: Session) -> list[UserAccount]:
    return list(session.exec(select(UserAccount).order_by(UserAccount.username)))


def get_user(session: Session, *, user_id: int) -> UserAccount:
    return get_or_404(session, UserAccount, user_id, "user")


def find_user(session: Session, *, username: str) -> UserAccount | None:
    query = select(UserAccount).where(func.lower(UserAccount.username) == username.lower())
    return session.exec(query).first()


def create_user(session: Session, *, username: str, password: str, role: str) -> UserAccount:
    username = username.strip()
    if not username or len(username) > 80:
        raise InputError("username: Give a name of 1 to 80 characters.", field="username")
    if role not in ROLES:
        raise InputError(f"role: Choose one of {', '.join(ROLES)}.", field="role")
    problem = password_problem(password)
    if problem:
        raise InputError(f"password: {problem}", field="password")
    if find_user(session, username=username) is not None:
        raise ConflictError(f"A user named “{username}” already exists.", field="username")
    db_user = UserAccount(username=username, password_hash=hash_password(password), role=role)
    session.add(db_user)
    commit_or_conflict(session, f"A user named “{username}” already exists.", "username")
    session.refresh(db_user)
    return db_user


def set_role(session: Session, *, user_id: int, role: str, disabled: bool) -> UserAccount:
    if role not in ROLES:
        raise InputError(f"role: Choose one of {', '.join(ROLES)}.", field="role")
    db_user = get_user(session, user_id=user_id)
    admins = [u for u in list_users(session) if u.role == "admin" and not u.disabled]
    if db_user in admins and (role != "admin" or disabled) and len(admins) == 1:
        raise ConflictError("Keep at least one active admin.", field="role")
    db_user.role, db_user.disabled = role, disabled
    session.add(db_user)
    session.commit()
    if disabled:
        end_sessions(session, user_id=user_id)
    return db_user


def _recent_failures(session: Session, *, username: str, address: str) -> tuple[int, int]:
    since = utcnow() - FAILURE_WINDOW
    by_account = (
        select(func.count())
        .select_from(LoginFailure)
        .where(func.lower(LoginFailure.username) == username.lower(), LoginFailure.at >= since)
    )
    by_address = (
        select(func.count())
        .select_from(LoginFailure)
        .where(LoginFailure.address == address, LoginFailure.at >= since)
    )
    return int(session.exec(by_account).one()), int(session.exec(by_address).one())


def authenticate(session: Session, *, username: str, password: str, address: str) -> UserAccount:
    """Check a sign-in; count failures per account and per address and slow guessing down."""
    per_account, per_address = _recent_failures(session, username=username, address=address)
    if per_account >= MAX_FAILURES_PER_ACCOUNT or per_address >= MAX_FAILURES_PER_ADDRESS:
        raise TooManyAttempts(
            "Too many failed sign-ins; wait 15 minutes and try again.", field="username"
        )
    db_user = find_user(session, username=username)
    # Verify against a real hash even for unknown names, so timing does not reveal them.
    ok = verify_password(db_user.password_hash if db_user else _dummy_hash(), password)
    if db_user is None or not ok or db_user.disabled:
        session.add(LoginFailure(username=username[:80], address=address[:64]))
        session.commit()
        raise InputError("Wrong user name or password.", field="password")
    session.exec(delete(LoginFailure).where(func.lower(LoginFailure.username) == username.lower()))
    session.commit()
    return db_user


def start_session(session: Session, *, user: UserAccount, api_token: bool = False) -> str:
    """Create a session and return its token; only the token's digest is stored."""
    token = secrets.token_urlsafe(32)
    lifetime = dt.timedelta(days=API_TOKEN_DAYS) if api_token else dt.timedelta(hours=SESSION_HOURS)
    expires = utcnow() + lifetime
    session.add(UserSession(token_digest=digest(token), user_id=user.id or 0, expires_at=expires))
    # Old failures and expired sessions are cleared on the way; nothing else needs a timer.
    session.exec(delete(UserSession).where(col(UserSession.expires_at) < utcnow()))
    session.exec(delete(LoginFailure).where(col(LoginFailure.at) < utcnow() - FAILURE_WINDOW))
    session.commit()
    return token


def user_for_token(session: Session, *, token: str) -> UserAccount | None:
    row = session.exec(select(UserSession).where(UserSession.token_digest == digest(token))).first()
    if row is None or row.expires_at < utcnow():
        return None
    db_user = session.get(UserAccount, row.user_id)
    return None if db_user is None or db_user.disabled else db_user


def end_session(session: Session, *, token: str) -> None:
    session.exec(delete(UserSession).where(col(UserSession.token_digest) == digest(token)))
    session.commit()


def end_sessions(session: Session, *, user_id: int) -> None:
    session.exec(delete(UserSession).where(col(UserSession.user_id) == user_id))
    session.commit()


@cache
def _dummy_hash() -> str:
    return hash_password(secrets.token_urlsafe(16))
