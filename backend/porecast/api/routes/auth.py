"""Login, logout, password change and personal API tokens."""

from __future__ import annotations

import asyncio

from fastapi import APIRouter, Request, Response, status
from starlette.concurrency import run_in_threadpool

from porecast.services import auth as auth_service
from porecast.services.errors import NotAuthenticated

from .. import schemas as s
from ..deps import (
    CSRF_COOKIE,
    SESSION_COOKIE,
    CurrentUser,
    HasherDep,
    IdPath,
    NowDep,
    SessionDep,
    SettingsDep,
)
from ..errors import AUTH, R401, R404, R422, R429

router = APIRouter(prefix="/auth", tags=["auth"])


def _set_cookies(response: Response, request: Request, settings, result) -> None:
    secure = request.url.scheme == "https" or settings.cookie_secure
    max_age = int(settings.session_absolute_hours * 3600)
    response.set_cookie(SESSION_COOKIE, result.session_id, max_age=max_age, path="/",
                        httponly=True, samesite="lax", secure=secure)
    # Readable by the page's scripts on purpose: they echo it in X-CSRF-Token.
    response.set_cookie(CSRF_COOKIE, result.csrf, max_age=max_age, path="/",
                        httponly=False, samesite="lax", secure=secure)


def _clear_cookies(response: Response) -> None:
    response.delete_cookie(SESSION_COOKIE, path="/")
    response.delete_cookie(CSRF_COOKIE, path="/")


@router.post("/login", response_model=s.LoginOut, responses=R401 | R422 | R429)
async def login(
    body: s.LoginIn,
    request: Request,
    response: Response,
    db: SessionDep,
    settings: SettingsDep,
    hasher: HasherDep,
    now: NowDep,
) -> s.LoginOut:
    """Log in with user name and password; sets the session and CSRF cookies."""
    try:
        result = await run_in_threadpool(
            auth_service.login, db, body.username, body.password, now=now, hasher=hasher,
            secret=settings.secret_key.get_secret_value(),
            max_failures=settings.login_max_failures,
            window_seconds=settings.login_window_seconds,
            client=request.client.host if request.client else None,
            user_agent=request.headers.get("user-agent"),
        )
    except NotAuthenticated:
        await asyncio.sleep(settings.login_failure_delay_seconds)
        raise
    _set_cookies(response, request, settings, result)
    return s.LoginOut(user=s.UserOut.model_validate(result.user), csrf_token=result.csrf)


@router.post("/logout", status_code=status.HTTP_204_NO_CONTENT, responses=AUTH)
def logout(request: Request, response: Response, user: CurrentUser, db: SessionDep) -> None:
    """End the current browser session."""
    session_id = getattr(request.state, "session_id", None)
    if session_id:
        auth_service.logout(db, session_id)
    _clear_cookies(response)


@router.get("/me", response_model=s.UserOut, responses=R401)
def me(user: CurrentUser) -> s.UserOut:
    """The logged-in user."""
    return s.UserOut.model_validate(user)


@router.post("/password", status_code=status.HTTP_204_NO_CONTENT, responses=AUTH)
def change_password(
    body: s.PasswordChangeIn,
    request: Request,
    response: Response,
    user: CurrentUser,
    db: SessionDep,
    settings: SettingsDep,
    hasher: HasherDep,
    now: NowDep,
) -> None:
    """Change your password; ends all your sessions and opens a new one for this browser."""
    auth_service.change_password(db, user, body.current_password, body.new_password, now=now,
                                 hasher=hasher)
    if getattr(request.state, "session_id", None):
        result = auth_service.open_session_for(db, user, now=now,
                                               secret=settings.secret_key.get_secret_value())
        _set_cookies(response, request, settings, result)


@router.get("/tokens", response_model=list[s.TokenOut], responses=R401)
def list_tokens(user: CurrentUser, db: SessionDep) -> list[s.TokenOut]:
    """Your personal API tokens (without their values)."""
    return [s.TokenOut.model_validate(t) for t in auth_service.list_tokens(db, user)]


@router.post("/tokens", response_model=s.TokenCreatedOut, status_code=201, responses=AUTH)
def create_token(
    body: s.TokenCreateIn, user: CurrentUser, db: SessionDep, now: NowDep
) -> s.TokenCreatedOut:
    """Create a personal API token; its value is shown only in this response."""
    token, raw = auth_service.create_token(db, user, body.name, now=now,
                                           expires_days=body.expires_days)
    return s.TokenCreatedOut(**s.TokenOut.model_validate(token).model_dump(), token=raw)


@router.delete("/tokens/{token_id}", status_code=204, responses=AUTH | R404 | R422)
def revoke_token(token_id: IdPath, user: CurrentUser, db: SessionDep) -> None:
    """Revoke one of your API tokens."""
    auth_service.revoke_token(db, user, token_id)
