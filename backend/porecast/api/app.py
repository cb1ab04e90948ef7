"""The application factory: settings in, ASGI app out; nothing happens at import."""

from __future__ import annotations

import importlib.util
from collections.abc import Callable
from datetime import datetime
from pathlib import Path
from typing import Any

from fastapi import APIRouter, FastAPI
from fastapi.responses import FileResponse, JSONResponse
from fastapi.staticfiles import StaticFiles
from starlette.types import ASGIApp, Receive, Scope, Send

from porecast import __version__
from porecast.db.session import make_engine, make_session_factory
from porecast.services.auth import password_hasher
from porecast.settings import Settings, get_settings

from . import errors
from .deps import utc_now
from .routes import auth, comments, grids, projects, prospects, runs, scenarios, users, wells
from .routes import previews as preview_routes

API_PREFIX = "/api"


class BodyLimit:
    """Refuse a request whose declared Content-Length is over its limit (413).

    JSON bodies have the JSON limit; any other body is a file and may reach the
    upload limit (file bodies are also counted while they stream in, see
    ``receive_file``). This guard answers before any route code runs.
    """

    def __init__(self, app: ASGIApp, upload_limit: int, json_limit: int):
        self.app = app
        self.upload_limit = upload_limit
        self.json_limit = json_limit

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "http":
            headers = dict(scope.get("headers", []))
            is_json = b"json" in headers.get(b"content-type", b"").split(b";")[0]
            limit = self.json_limit if is_json else self.upload_limit
            value = headers.get(b"content-length")
            if value is not None and (not value.isdigit() or int(value) > limit):
                status = 413 if value.isdigit() else 400
                detail = "the request body is too large" if status == 413 else "bad Content-Length"
                response = JSONResponse({"detail": detail, "errors": []}, status_code=status)
                await response(scope, receive, send)
                return
        await self.app(scope, receive, send)


def plotly_js_path() -> Path | None:
    """``plotly.min.js`` shipped inside the plotly Python package, if installed."""
    spec = importlib.util.find_spec("plotly")
    if spec is None or spec.origin is None:
        return None
    path = Path(spec.origin).parent / "package_data" / "plotly.min.js"
    return path if path.is_file() else None


def create_app(
    settings: Settings | None = None,
    *,
    clock: Callable[[], datetime] = utc_now,
    engine: Any = None,
) -> FastAPI:
    """Build the Porecast ASGI app.

    Parameters
    ----------
    settings : Settings, optional
        Default: :func:`porecast.settings.get_settings`.
    clock : callable returning an aware datetime
        Source of "now" for sessions and timestamps (tests pass a fake clock).
    engine : sqlalchemy Engine or Connection, optional
        Bind to use instead of building an engine from ``settings`` (tests).
    """
    settings = settings or get_settings()
    settings.files_dir.mkdir(parents=True, exist_ok=True)
    settings.tmp_dir.mkdir(parents=True, exist_ok=True)
    bind = engine if engine is not None else make_engine(settings.sqlalchemy_url)

    app = FastAPI(
        title="Porecast",
        version=__version__,
        description="Scenario-based facies prediction for exploration teams. Outputs are "
        "screening estimates; pressure and temperature are not for well design, drilling "
        "or well control.",
        openapi_url="/openapi.json",
        docs_url="/api/docs",
        redoc_url=None,
    )
    app.state.settings = settings
    app.state.clock = clock
    app.state.engine = bind
    app.state.session_factory = make_session_factory(bind)
    app.state.hasher = password_hasher(settings.password_hash_profile)
    errors.install(app)

    api = APIRouter(prefix=API_PREFIX)
    for module in (auth, users, projects, scenarios, comments, wells, grids, prospects, runs):
        api.include_router(module.router)
    api.include_router(preview_routes.router)
    app.include_router(api)

    plotly_js = plotly_js_path()
    if plotly_js is not None:

        @app.get("/vendor/plotly.min.js", include_in_schema=False)
        def plotly_min_js() -> FileResponse:
            """plotly.js from the plotly Python package."""
            return FileResponse(plotly_js, media_type="text/javascript")

    if settings.frontend_dir is not None and settings.frontend_dir.is_dir():
        app.mount("/", StaticFiles(directory=settings.frontend_dir, html=True), name="frontend")

    app.add_middleware(BodyLimit, upload_limit=settings.max_upload_bytes,
                       json_limit=settings.max_json_bytes)
    return app
