"""Errors raised by the services; the API maps each to one HTTP status code."""

from __future__ import annotations

from typing import Any


class ServiceError(Exception):
    """Base class; ``detail`` is a plain-words message for the client."""

    def __init__(self, detail: str):
        super().__init__(detail)
        self.detail = detail


class NotAuthenticated(ServiceError):
    """No valid credentials (HTTP 401)."""


class PermissionDenied(ServiceError):
    """A member whose role does not allow the action (HTTP 403)."""


class NotFound(ServiceError):
    """Missing, or in a project the caller is not a member of (HTTP 404)."""


class Conflict(ServiceError):
    """The action contradicts the current state (HTTP 409)."""


class StaleVersion(ServiceError):
    """If-Match names a version that is no longer current (HTTP 412)."""

    def __init__(self, detail: str, current_etag: str):
        super().__init__(detail)
        self.current_etag = current_etag


class PreconditionRequired(ServiceError):
    """A conditional request was expected (HTTP 428)."""


class InvalidInput(ServiceError):
    """Input fails validation (HTTP 422); ``errors`` lists ``{"loc", "msg"}``."""

    def __init__(self, detail: str, errors: list[dict[str, Any]] | None = None):
        super().__init__(detail)
        self.errors = errors or []


class TooLarge(ServiceError):
    """An upload over the configured limit (HTTP 413)."""


class RateLimited(ServiceError):
    """Too many failed attempts (HTTP 429)."""

    def __init__(self, detail: str, retry_after: int):
        super().__init__(detail)
        self.retry_after = retry_after


class NotRunnable(ServiceError):
    """A run was asked for a scenario whose sections are not all ready (HTTP 409)."""

    def __init__(self, detail: str, not_ready: list[str]):
        super().__init__(detail)
        self.not_ready = not_ready
