"""The science package imports nothing of the web, the database or the workers."""

import ast
from pathlib import Path

import porecast.physics

FORBIDDEN_TOP = {"fastapi", "starlette", "sqlalchemy", "alembic", "celery", "kombu", "redis",
                 "uvicorn", "psycopg"}
FORBIDDEN_PROJECT = {"api", "db", "worker", "services", "io", "cli", "settings"}


def _imports(path: Path):
    tree = ast.parse(path.read_text(), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield alias.name, 0
        elif isinstance(node, ast.ImportFrom):
            yield node.module or "", node.level


def test_physics_imports_only_science_libraries():
    root = Path(porecast.physics.__file__).parent
    files = sorted(root.glob("*.py"))
    assert len(files) > 10
    offenders = []
    for path in files:
        for module, level in _imports(path):
            parts = module.split(".")
            if level == 0 and parts[0] in FORBIDDEN_TOP:
                offenders.append(f"{path.name}: {module}")
            if level == 0 and parts[0] == "porecast" and len(parts) > 1 and parts[1] != "physics":
                offenders.append(f"{path.name}: {module}")
            if level >= 2 and parts[0] in FORBIDDEN_PROJECT:
                offenders.append(f"{path.name}: {'.' * level}{module}")
    assert offenders == []
