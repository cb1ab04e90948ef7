"""Screenshots and timing records shared by the browser tests.

A plain module (not conftest) so test files can import it: several test
folders have a conftest.py, and importing one by name is ambiguous.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
SCREENSHOTS = ARTIFACTS / "screenshots"
TIMINGS: dict[str, Any] = {}


def shot(page: Any, name: str) -> Path:
    """Save a full-page screenshot under tests/artifacts/screenshots/."""
    SCREENSHOTS.mkdir(parents=True, exist_ok=True)
    path = SCREENSHOTS / f"{name}.png"
    page.evaluate("window.scrollTo(0, 0)")  # sticky panels in their resting place
    page.screenshot(path=str(path), full_page=True)
    return path


def record_timing(name: str, value: Any) -> None:
    TIMINGS[name] = value
