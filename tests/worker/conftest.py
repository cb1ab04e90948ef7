"""Fixtures of the worker suite (helpers in ``worker_helpers``)."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from threadpoolctl import threadpool_limits
from worker_helpers import Deployment


@pytest.fixture(autouse=True)
def _one_blas_thread():
    with threadpool_limits(1):
        yield


@pytest.fixture
def make_deployment(tmp_path: Path) -> Iterator[Callable[..., Deployment]]:
    made: list[Deployment] = []

    def make(**kw: Any) -> Deployment:
        d = Deployment(tmp_path / f"d{len(made)}", **kw)
        made.append(d)
        return d

    try:
        yield make
    finally:
        for d in made:
            d.stop_all()
