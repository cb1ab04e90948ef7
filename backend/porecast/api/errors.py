"""Service errors -> HTTP responses, and the error bodies declared in the schema."""

from __future__ import annotations

from typing import Any

from fastapi import FastAPI, Request
from fastapi.responses import JSONResponse
from pydantic import BaseModel

from porecast.services import errors as se

STATUS: dict[type[se.ServiceError], int] = {
    se.NotAuthenticated: 401,
    se.PermissionDenied: 403,
    se.NotFound: 404,
    se.Conflict: 409,
    se.NotRunnable: 409,
    se.StaleVersion: 412,
    se.TooLarge: 413,
    se.InvalidInput: 422,
    se.PreconditionRequired: 428,
    se.RateLimited: 429,
}


class FieldError(BaseModel):
    """One problem with the input: dotted field path and plain-words message."""

    loc: str
    msg: str


class ErrorBody(BaseModel):
    """Body of every error response of the service layer."""

    detail: str
    errors: list[FieldError] = []
    current_etag: str | None = None


def _describe(code: int, text: str) -> dict[str, Any]:
    return {"model": ErrorBody, "description": text}


#: Reusable ``responses=`` fragments for route declarations.
Responses = dict[int | str, dict[str, Any]]
R401: Responses = {401: _describe(401, "Not logged in (no valid session cookie or API token)")}
R403: Responses = {403: _describe(403, "Your role does not allow this, or the CSRF check failed")}
R404: Responses = {404: _describe(404, "Not found, or in a project you are not a member of")}
R409: Responses = {409: _describe(409, "Conflicts with the current state")}
R412: Responses = {412: _describe(412, "If-Match names a stale version; nothing was changed")}
R413: Responses = {413: _describe(413, "Upload larger than the configured limit")}
R422: Responses = {422: _describe(422, "Invalid input (the field path or file position is given)")}
R428: Responses = {428: _describe(428, "If-Match header required")}
R429: Responses = {429: _describe(429, "Too many failed logins; retry later")}

AUTH: Responses = R401 | R403 | R422
MEMBER: Responses = AUTH | R404
CONDITIONAL: Responses = MEMBER | R412 | R428


def install(app: FastAPI) -> None:
    """Register the handler that turns service errors into JSON error responses."""

    async def handle(request: Request, exc: Exception) -> JSONResponse:
        assert isinstance(exc, se.ServiceError)
        status = next(code for cls, code in STATUS.items() if isinstance(exc, cls))
        body: dict[str, Any] = {"detail": exc.detail, "errors": []}
        headers: dict[str, str] = {}
        if isinstance(exc, se.InvalidInput):
            body["errors"] = [{"loc": str(e.get("loc", "")), "msg": str(e.get("msg", ""))}
                              for e in exc.errors]
        if isinstance(exc, se.NotRunnable):
            body["errors"] = [{"loc": s, "msg": "not marked ready"} for s in exc.not_ready]
        if isinstance(exc, se.StaleVersion):
            body["current_etag"] = exc.current_etag
            headers["ETag"] = exc.current_etag
        if isinstance(exc, se.RateLimited):
            headers["Retry-After"] = str(exc.retry_after)
        if isinstance(exc, se.NotAuthenticated):
            headers["WWW-Authenticate"] = 'Bearer realm="porecast"'
        return JSONResponse(body, status_code=status, headers=headers)

    app.add_exception_handler(se.ServiceError, handle)
