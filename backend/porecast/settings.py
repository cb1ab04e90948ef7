"""Service configuration: one pydantic-settings class read from the environment.

Every setting can be given as an environment variable with the prefix
``PORECAST_`` (``PORECAST_DATABASE_URL``, ``PORECAST_DATA_DIR``,
``PORECAST_SECRET_KEY`` ...) or in an optional settings file (TOML or JSON)
named by ``PORECAST_SETTINGS_FILE``; environment variables win over the file.

Nothing here runs at import time: :func:`get_settings` builds (and caches) the
object on first use, and the app factory takes a ``Settings`` argument so tests
can pass their own.
"""

from __future__ import annotations

import json
import os
import tomllib
from functools import lru_cache
from pathlib import Path
from typing import Any, Literal

from pydantic import Field, SecretStr, model_validator
from pydantic_settings import BaseSettings, SettingsConfigDict

#: The secret shipped for local use only; refused in any other environment.
DEFAULT_SECRET = "porecast-local-development-secret-change-me"

#: Environments in which the default secret and test-only shortcuts are allowed.
LOCAL_ENVIRONMENTS = ("local", "dev", "test")


def _default_frontend_dir() -> Path:
    # Editable install: backend/porecast/settings.py -> repository root / frontend.
    return Path(__file__).resolve().parents[2] / "frontend"


class Settings(BaseSettings):
    """All configuration of the Porecast service."""

    model_config = SettingsConfigDict(env_prefix="PORECAST_", extra="ignore")

    environment: Literal["local", "dev", "test", "production"] = Field(
        "local", description="Deployment kind; anything but local/dev/test is treated as public"
    )
    data_dir: Path = Field(
        Path("porecast-data"), description="Uploaded files, results and the SQLite database"
    )
    database_url: str | None = Field(
        None,
        description="SQLAlchemy URL; default sqlite file in data_dir. PostgreSQL: "
        "postgresql+psycopg://user@host/db",
    )
    secret_key: SecretStr = Field(
        SecretStr(DEFAULT_SECRET), description="Signs CSRF tokens; at least 32 characters"
    )
    broker_url: str | None = Field(None, description="Celery broker URL (worker step)")
    result_backend: str | None = Field(None, description="Celery result backend URL")
    max_upload_mb: float = Field(512.0, gt=0, description="Largest accepted upload, MiB")
    max_json_kb: float = Field(1024.0, gt=0, description="Largest accepted JSON body, KiB")

    session_idle_minutes: float = Field(
        30.0, gt=0, description="A session ends after this long without a request"
    )
    session_absolute_hours: float = Field(
        12.0, gt=0, description="A session ends this long after login whatever the activity"
    )
    cookie_secure: bool = Field(
        False, description="Always mark cookies Secure (they are Secure on https anyway)"
    )
    login_max_failures: int = Field(
        5, ge=1, description="Failed logins per user name and window before refusing"
    )
    login_window_seconds: float = Field(900.0, gt=0, description="Window of the failure count")
    login_failure_delay_seconds: float = Field(
        0.5, ge=0, le=5, description="Pause before answering a failed login"
    )

    frontend_dir: Path | None = Field(
        default_factory=_default_frontend_dir, description="Static front-end folder served at /"
    )
    #: TEST ONLY. "test-fast" swaps the argon2id cost for a trivial one so the API
    #: suite runs quickly; refused unless environment == "test".
    password_hash_profile: Literal["production", "test-fast"] = "production"

    @model_validator(mode="after")
    def _refuse_unsafe_defaults(self) -> Settings:
        public = self.environment not in LOCAL_ENVIRONMENTS
        secret = self.secret_key.get_secret_value()
        if public and secret == DEFAULT_SECRET:
            raise ValueError(
                "PORECAST_SECRET_KEY must be set to a random value outside local/dev use "
                "(for example: python3 -c 'import secrets; print(secrets.token_urlsafe(48))')"
            )
        if public and len(secret) < 32:
            raise ValueError("PORECAST_SECRET_KEY must be at least 32 characters")
        if self.password_hash_profile != "production" and self.environment != "test":
            raise ValueError("password_hash_profile 'test-fast' is allowed only in tests")
        return self

    @property
    def sqlalchemy_url(self) -> str:
        """The database URL, defaulting to a SQLite file inside ``data_dir``."""
        if self.database_url:
            return self.database_url
        return f"sqlite:///{(self.data_dir / 'porecast.sqlite').resolve()}"

    @property
    def files_dir(self) -> Path:
        """Stored upload files (never served directly)."""
        return self.data_dir / "files"

    @property
    def tmp_dir(self) -> Path:
        """Upload staging area on the same file system as ``files_dir``."""
        return self.data_dir / "tmp"

    @property
    def max_upload_bytes(self) -> int:
        """``max_upload_mb`` in bytes."""
        return int(self.max_upload_mb * 1024 * 1024)

    @property
    def max_json_bytes(self) -> int:
        """``max_json_kb`` in bytes."""
        return int(self.max_json_kb * 1024)


def read_settings_file(path: str | Path) -> dict[str, Any]:
    """Read a TOML or JSON settings file into a dict of field values."""
    path = Path(path)
    text = path.read_text(encoding="utf-8")
    if path.suffix.lower() == ".json":
        data = json.loads(text)
    else:
        data = tomllib.loads(text)
    if not isinstance(data, dict):
        raise ValueError(f"{path}: a settings file holds a table of names and values")
    return data


def load_settings(settings_file: str | Path | None = None, **overrides: Any) -> Settings:
    """Build ``Settings`` from a file (optional), the environment and overrides.

    Precedence: keyword overrides > environment variables > settings file > defaults.
    """
    file_values: dict[str, Any] = {}
    settings_file = settings_file or os.environ.get("PORECAST_SETTINGS_FILE")
    if settings_file:
        file_values = read_settings_file(settings_file)
    env_names = {
        name
        for name in Settings.model_fields
        if f"PORECAST_{name.upper()}" in os.environ
    }
    # Values from the file only fill what the environment does not set.
    init = {k: v for k, v in file_values.items() if k not in env_names}
    init.update(overrides)
    return Settings(**init)


@lru_cache(maxsize=1)
def get_settings() -> Settings:
    """The process-wide settings, built on first use."""
    return load_settings()
