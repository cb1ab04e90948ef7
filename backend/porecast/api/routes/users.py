"""Accounts (administrators)."""

from __future__ import annotations

from fastapi import APIRouter

from porecast.services import auth as auth_service

from .. import schemas as s
from ..deps import AdminUser, HasherDep, NowDep, SessionDep
from ..errors import AUTH, R409

router = APIRouter(prefix="/users", tags=["users"])


@router.get("", response_model=list[s.UserOut], responses=AUTH)
def list_users(admin: AdminUser, db: SessionDep) -> list[s.UserOut]:
    """All accounts (administrators)."""
    return [s.UserOut.model_validate(u) for u in auth_service.list_users(db)]


@router.post("", response_model=s.UserOut, status_code=201, responses=AUTH | R409)
def create_user(
    body: s.UserCreateIn, admin: AdminUser, db: SessionDep, hasher: HasherDep, now: NowDep
) -> s.UserOut:
    """Create an account (administrators)."""
    user = auth_service.create_user(db, body.username, body.password, now=now, hasher=hasher,
                                    email=body.email, is_admin=body.is_admin)
    return s.UserOut.model_validate(user)
