"""Shared pytest fixtures.

Tests that need PostgreSQL, Redis or Chromium call :func:`need_service`; on a
bare machine they skip with the reason, under ``PORECAST_REQUIRE_SERVICES=1``
(set by ``.ci/run``) the same condition is a failure.
"""

from __future__ import annotations

import os

import numpy as np
import pytest


def need_service(available: bool, reason: str) -> None:
    """Skip (or fail in CI) when a service the test needs is missing."""
    if available:
        return
    if os.environ.get("PORECAST_REQUIRE_SERVICES") == "1":
        pytest.fail(f"required service missing in CI: {reason}")
    pytest.skip(reason)


@pytest.fixture
def rng() -> np.random.Generator:
    """A seeded generator; every Monte Carlo test starts from the same state."""
    return np.random.default_rng(20261201)
