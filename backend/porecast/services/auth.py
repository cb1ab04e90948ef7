"""Accounts, passwords, login sessions and personal API tokens.

Passwords are hashed with argon2id. Browser sessions and API tokens are random
values (``secrets.token_urlsafe(32)``, 256 bits) of which only a SHA-256 hash is
stored, so a copy of the database does not let anyone log in. The CSRF token of
a session is ``HMAC-SHA256(secret_key, session id)`` (the "signed double-submit
cookie" of the OWASP CSRF Prevention Cheat Sheet).
"""

from __future__ import annotations

import hashlib
import hmac
import re
import secrets
from dataclasses import dataclass
from datetime import datetime, timedelta
from functools import lru_cache

import argon2
from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError
from sqlalchemy import delete, func, select
from sqlalchemy.orm import Session

from porecast.db.models import ApiToken, AuthSession, LoginFailure, User

from .errors import Conflict, InvalidInput, NotAuthenticated, NotFound, RateLimited

# Production argon2id cost: RFC 9106 section 4, second recommended option
# ("low memory"): t=3, m=64 MiB, p=4 (argon2-cffi's profiles.RFC_9106_LOW_MEMORY).
# That is above the OWASP Password Storage Cheat Sheet minimum for argon2id
# (m=19 MiB = 19456 KiB, t=2, p=1), which OWASP ASVS 5.0 V11.4 defers to.
PRODUCTION_ARGON2 = argon2.profiles.RFC_9106_LOW_MEMORY
OWASP_MINIMUM = {"memory_cost": 19456, "time_cost": 2, "parallelism": 1}

# TEST ONLY: trivial cost so the API suite does not spend seconds per login.
# Selected by Settings.password_hash_profile == "test-fast", which the settings
# refuse unless environment == "test".
_TEST_FAST_ARGON2 = argon2.Parameters(
    type=argon2.Type.ID,
    version=19,
    salt_len=16,
    hash_len=32,
    time_cost=1,
    memory_cost=8,
    parallelism=1,
)

# OWASP ASVS 4.0.3 V2.1.1 (at least 12 characters) and V2.1.2 (at most 128 permitted).
PASSWORD_MIN_LENGTH = 12
PASSWORD_MAX_LENGTH = 128
USERNAME_PATTERN = re.compile(r"^[A-Za-z0-9_.\-]{2,64}$")


@lru_cache(maxsize=2)
def password_hasher(profile: str = "production") -> PasswordHasher:
    """The argon2id hasher for a cost profile ("production" or TEST-ONLY "test-fast")."""
    params = PRODUCTION_ARGON2 if profile == "production" else _TEST_FAST_ARGON2
    return PasswordHasher.from_parameters(params)


def _digest(raw: str) -> str:
    return hashlib.sha256(raw.encode()).hexdigest()


def csrf_token(secret: str, raw_session_id: str) -> str:
    """The CSRF token bound to one session."""
    return hmac.new(secret.encode(), raw_session_id.encode(), hashlib.sha256).hexdigest()


def check_password_policy(password: str) -> None:
    """Refuse a password outside the length policy (no composition rules, per ASVS)."""
    if len(password) < PASSWORD_MIN_LENGTH:
        raise InvalidInput(
            f"password must have at least {PASSWORD_MIN_LENGTH} characters",
            [{"loc": "password", "msg": f"at least {PASSWORD_MIN_LENGTH} characters"}],
        )
    if len(password) > PASSWORD_MAX_LENGTH:
        raise InvalidInput(
            f"password must have at most {PASSWORD_MAX_LENGTH} characters",
            [{"loc": "password", "msg": f"at most {PASSWORD_MAX_LENGTH} characters"}],
        )


# --------------------------------------------------------------------------- users


def create_user(
    db: Session,
    username: str,
    password: str,
    *,
    now: datetime,
    hasher: PasswordHasher,
    email: str | None = None,
    is_admin: bool = False,
) -> User:
    """Create an account; the user name is unique (case-insensitive)."""
    if not USERNAME_PATTERN.match(username):
        raise InvalidInput(
            "user name must be 2-64 letters, digits, '.', '_' or '-'",
            [{"loc": "username", "msg": "2-64 letters, digits, '.', '_' or '-'"}],
        )
    check_password_policy(password)
    if find_user(db, username) is not None:
        raise Conflict(f"user name {username!r} is taken")
    user = User(
        username=username,
        email=email,
        password_hash=hasher.hash(password),
        is_admin=is_admin,
        is_active=True,
        created_at=now,
        password_changed_at=now,
    )
    db.add(user)
    db.flush()
    return user


def find_user(db: Session, username: str) -> User | None:
    """A user by name, ignoring case."""
    return db.scalar(select(User).where(func.lower(User.username) == username.lower()))


def list_users(db: Session) -> list[User]:
    """All accounts, by name."""
    return list(db.scalars(select(User).order_by(User.username)))


# --------------------------------------------------------------------------- login


@dataclass(frozen=True)
class LoginResult:
    """A new session: the user, the raw session id (cookie) and its CSRF token."""

    user: User
    session_id: str
    csrf: str


def _recent_failures(db: Session, username: str, since: datetime) -> int:
    return db.scalar(
        select(func.count())
        .select_from(LoginFailure)
        .where(LoginFailure.username == username.lower(), LoginFailure.at >= since)
    ) or 0


def login(
    db: Session,
    username: str,
    password: str,
    *,
    now: datetime,
    hasher: PasswordHasher,
    secret: str,
    max_failures: int,
    window_seconds: float,
    client: str | None = None,
    user_agent: str | None = None,
) -> LoginResult:
    """Check a password and open a session.

    After ``max_failures`` failures for a user name within ``window_seconds`` the
    name is refused with :class:`RateLimited` until the oldest failure ages out,
    whatever the password (OWASP ASVS 4.0.3 V2.2.1, soft lockout).
    """
    since = now - timedelta(seconds=window_seconds)
    db.execute(delete(LoginFailure).where(LoginFailure.at < since))
    if _recent_failures(db, username, since) >= max_failures:
        oldest = db.scalar(
            select(func.min(LoginFailure.at)).where(
                LoginFailure.username == username.lower(), LoginFailure.at >= since
            )
        )
        wait = window_seconds - (now - oldest).total_seconds() if oldest else window_seconds
        raise RateLimited("too many failed logins; try again later", max(1, int(wait) + 1))
    user = find_user(db, username)
    ok = False
    if user is not None and user.is_active:
        try:
            ok = hasher.verify(user.password_hash, password)
        except (VerificationError, InvalidHashError):
            ok = False
    else:
        # Spend the same work for unknown names so timing does not reveal them.
        try:
            hasher.verify(_dummy_hash(hasher), password)
        except (VerificationError, InvalidHashError):
            pass
    if not ok or user is None:
        db.add(LoginFailure(username=username.lower()[:64], client=client, at=now))
        # The failure must count although the request is refused: commit it here,
        # the one place a service commits on its own.
        db.commit()
        raise NotAuthenticated("wrong user name or password")
    if hasher.check_needs_rehash(user.password_hash):
        user.password_hash = hasher.hash(password)
    raw = secrets.token_urlsafe(32)
    db.add(
        AuthSession(
            user_id=user.id,
            id_hash=_digest(raw),
            created_at=now,
            last_seen_at=now,
            user_agent=(user_agent or "")[:255] or None,
        )
    )
    db.execute(delete(LoginFailure).where(LoginFailure.username == username.lower()))
    db.flush()
    return LoginResult(user=user, session_id=raw, csrf=csrf_token(secret, raw))


@lru_cache(maxsize=4)
def _dummy_hash_for(params: tuple[int, int, int]) -> str:
    t, m, p = params
    return PasswordHasher(time_cost=t, memory_cost=m, parallelism=p).hash(secrets.token_hex(8))


def _dummy_hash(hasher: PasswordHasher) -> str:
    return _dummy_hash_for((hasher.time_cost, hasher.memory_cost, hasher.parallelism))


def resolve_session(
    db: Session,
    raw_session_id: str,
    *,
    now: datetime,
    idle: timedelta,
    absolute: timedelta,
) -> AuthSession | None:
    """The live session for a cookie value; expired sessions are deleted.

    A session ends ``idle`` after its last request and ``absolute`` after login
    (OWASP ASVS 4.0.3 V3.3.2 inactivity and absolute timeouts).
    """
    sess = db.scalar(select(AuthSession).where(AuthSession.id_hash == _digest(raw_session_id)))
    if sess is None:
        return None
    if now - sess.last_seen_at > idle or now - sess.created_at > absolute:
        db.delete(sess)
        db.flush()
        return None
    if not sess.user.is_active:
        return None
    # Touch at most every 1/20 of the idle timeout to keep writes few.
    if now - sess.last_seen_at > idle / 20:
        sess.last_seen_at = now
    return sess


def logout(db: Session, raw_session_id: str) -> None:
    """End one session."""
    db.execute(delete(AuthSession).where(AuthSession.id_hash == _digest(raw_session_id)))


def end_all_sessions(db: Session, user: User) -> int:
    """End every session of a user; returns how many."""
    result = db.execute(delete(AuthSession).where(AuthSession.user_id == user.id))
    return int(result.rowcount or 0)  # type: ignore[attr-defined]


def change_password(
    db: Session,
    user: User,
    current_password: str,
    new_password: str,
    *,
    now: datetime,
    hasher: PasswordHasher,
) -> None:
    """Change a password and end every session of the user (ASVS 4.0.3 V3.3.3)."""
    try:
        hasher.verify(user.password_hash, current_password)
    except (VerificationError, InvalidHashError):
        raise InvalidInput(
            "the current password is wrong",
            [{"loc": "current_password", "msg": "does not match"}],
        ) from None
    check_password_policy(new_password)
    user.password_hash = hasher.hash(new_password)
    user.password_changed_at = now
    end_all_sessions(db, user)


def open_session_for(db: Session, user: User, *, now: datetime, secret: str) -> LoginResult:
    """A fresh session for an already authenticated user (after a password change)."""
    raw = secrets.token_urlsafe(32)
    db.add(AuthSession(user_id=user.id, id_hash=_digest(raw), created_at=now, last_seen_at=now))
    db.flush()
    return LoginResult(user=user, session_id=raw, csrf=csrf_token(secret, raw))


# --------------------------------------------------------------------------- API tokens

TOKEN_PREFIX = "pct_"


def create_token(
    db: Session, user: User, name: str, *, now: datetime, expires_days: int | None = None
) -> tuple[ApiToken, str]:
    """A new personal API token; the raw value is returned once and never stored."""
    raw = TOKEN_PREFIX + secrets.token_urlsafe(32)
    token = ApiToken(
        user_id=user.id,
        name=name,
        token_hash=_digest(raw),
        prefix=raw[: len(TOKEN_PREFIX) + 6],
        created_at=now,
        expires_at=now + timedelta(days=expires_days) if expires_days else None,
    )
    db.add(token)
    db.flush()
    return token, raw


def resolve_token(db: Session, raw: str, *, now: datetime) -> User | None:
    """The user of a live API token."""
    token = db.scalar(select(ApiToken).where(ApiToken.token_hash == _digest(raw)))
    if token is None or (token.expires_at is not None and token.expires_at <= now):
        return None
    if not token.user.is_active:
        return None
    if token.last_used_at is None or now - token.last_used_at > timedelta(minutes=5):
        token.last_used_at = now
    return token.user


def list_tokens(db: Session, user: User) -> list[ApiToken]:
    """The caller's tokens (without their values)."""
    return list(
        db.scalars(select(ApiToken).where(ApiToken.user_id == user.id).order_by(ApiToken.id))
    )


def revoke_token(db: Session, user: User, token_id: int) -> None:
    """Delete one of the caller's tokens."""
    token = db.get(ApiToken, token_id)
    if token is None or token.user_id != user.id:
        raise NotFound("token not found")
    db.delete(token)
