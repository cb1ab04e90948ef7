"""Shared dependencies: settings, clock, database session and the caller.

Authentication: ``Authorization: Bearer <personal token>`` (scripts; no CSRF
check, the browser never sends it by itself) or the session cookie (browser).
A cookie-authenticated unsafe request must echo the CSRF cookie in the
``X-CSRF-Token`` header, and the value must be the HMAC of that session
(signed double-submit cookie, OWASP CSRF Prevention Cheat Sheet).
"""

from __future__ import annotations

import hmac
from collections.abc import Callable, Iterator
from datetime import UTC, datetime, timedelta
from typing import Annotated

from argon2 import PasswordHasher
from fastapi import Depends, Header, Path, Query, Request, Security
from fastapi.security import APIKeyCookie, HTTPAuthorizationCredentials, HTTPBearer
from sqlalchemy.orm import Session
from starlette.concurrency import run_in_threadpool

from porecast.db.models import User
from porecast.db.session import WRITE_OPTION
from porecast.services import auth as auth_service
from porecast.services import uploads
from porecast.services.errors import NotAuthenticated, PermissionDenied
from porecast.settings import Settings

SESSION_COOKIE = "porecast_session"
CSRF_COOKIE = "porecast_csrf"
CSRF_HEADER = "X-CSRF-Token"
SAFE_METHODS = frozenset({"GET", "HEAD", "OPTIONS", "TRACE"})

bearer_scheme = HTTPBearer(auto_error=False, description="Personal API token")
cookie_scheme = APIKeyCookie(
    name=SESSION_COOKIE, auto_error=False, description="Browser session (needs X-CSRF-Token)"
)


def utc_now() -> datetime:
    """The real clock (tests swap ``app.state.clock``)."""
    return datetime.now(UTC)


def get_settings(request: Request) -> Settings:
    """The settings the app was built with."""
    return request.app.state.settings


def get_now(request: Request) -> datetime:
    """Current time from the app's clock."""
    clock: Callable[[], datetime] = request.app.state.clock
    return clock()


def get_hasher(request: Request) -> PasswordHasher:
    """The argon2id hasher of the app's settings."""
    return request.app.state.hasher


def begin_write(db: Session) -> None:
    """Start the session's next transaction as a writer (SQLite: BEGIN IMMEDIATE)."""
    if db.get_bind().dialect.name == "sqlite" and not db.in_transaction():
        db.connection(execution_options={WRITE_OPTION: True})


def _session(request: Request, write: bool) -> Iterator[Session]:
    db: Session = request.app.state.session_factory()
    try:
        if write:
            begin_write(db)
        yield db
        db.commit()
    except BaseException:
        db.rollback()
        raise
    finally:
        db.close()


STREAMED_UPLOAD = "x-streamed-upload"


def upload_body(description: str) -> dict:
    """``openapi_extra`` of a route whose body is a raw file streamed to disk."""
    return {
        STREAMED_UPLOAD: True,
        "requestBody": {
            "required": True,
            "description": description,
            "content": {"application/octet-stream": {"schema": {"type": "string",
                                                                 "format": "binary"}}},
        },
    }


def get_db(request: Request) -> Iterator[Session]:
    """A session committed when the route returns, rolled back if it raises.

    Unsafe requests take the SQLite write lock at BEGIN, except streamed uploads,
    which must not hold it while the body arrives (see ``receive_file``).
    """
    route = request.scope.get("route")
    streamed = bool((getattr(route, "openapi_extra", None) or {}).get(STREAMED_UPLOAD))
    yield from _session(request, write=request.method not in SAFE_METHODS and not streamed)


async def receive_file(request: Request, db: Session, settings: Settings, filename: str):
    """Stream the request body to a temporary file (size-checked), then begin writing.

    The read transaction of the authorisation checks is ended first so a long
    upload holds no database lock; the write transaction starts afterwards.
    """
    await run_in_threadpool(db.commit)
    raw_length = request.headers.get("content-length")
    declared = int(raw_length) if raw_length and raw_length.isdigit() else None
    path = await uploads.receive_upload(
        request.stream(), filename=filename, declared_length=declared,
        limit=settings.max_upload_bytes, tmp_dir=settings.tmp_dir,
    )
    await run_in_threadpool(begin_write, db)
    return path


SettingsDep = Annotated[Settings, Depends(get_settings)]
NowDep = Annotated[datetime, Depends(get_now)]
HasherDep = Annotated[PasswordHasher, Depends(get_hasher)]
SessionDep = Annotated[Session, Depends(get_db, scope="function")]


def _check_csrf(request: Request, raw_session: str, secret: str) -> None:
    header = request.headers.get(CSRF_HEADER, "")
    cookie = request.cookies.get(CSRF_COOKIE, "")
    expected = auth_service.csrf_token(secret, raw_session)
    if not header or not hmac.compare_digest(header, cookie) or not hmac.compare_digest(
        header, expected
    ):
        raise PermissionDenied(
            f"missing or wrong CSRF token: send the {CSRF_COOKIE} cookie value in {CSRF_HEADER}"
        )


def get_current_user(
    request: Request,
    db: SessionDep,
    settings: SettingsDep,
    now: NowDep,
    bearer: Annotated[HTTPAuthorizationCredentials | None, Security(bearer_scheme)],
    cookie: Annotated[str | None, Security(cookie_scheme)],
) -> User:
    """The authenticated caller, or 401."""
    if bearer is not None:
        user = auth_service.resolve_token(db, bearer.credentials, now=now)
        if user is None:
            raise NotAuthenticated("the API token is not valid or has expired")
        return user
    if cookie:
        sess = auth_service.resolve_session(
            db,
            cookie,
            now=now,
            idle=timedelta(minutes=settings.session_idle_minutes),
            absolute=timedelta(hours=settings.session_absolute_hours),
        )
        if sess is None:
            raise NotAuthenticated("the session has ended; log in again")
        if request.method not in SAFE_METHODS:
            _check_csrf(request, cookie, settings.secret_key.get_secret_value())
        request.state.session_id = cookie
        return sess.user
    raise NotAuthenticated("log in, or send Authorization: Bearer <token>")


def get_admin(user: Annotated[User, Depends(get_current_user)]) -> User:
    """The caller, who must be a site administrator."""
    if not user.is_admin:
        raise PermissionDenied("only an administrator may do this")
    return user


CurrentUser = Annotated[User, Depends(get_current_user)]
AdminUser = Annotated[User, Depends(get_admin)]
#: Largest id accepted anywhere (32-bit signed integer columns).
MAX_ID = 2**31 - 1
IdPath = Annotated[int, Path(ge=1, le=MAX_ID)]
IdQuery = Annotated[int | None, Query(ge=1, le=MAX_ID)]
IfMatch = Annotated[
    str | None,
    Header(alias="If-Match", description="ETag from your last GET (required for changes)"),
]
