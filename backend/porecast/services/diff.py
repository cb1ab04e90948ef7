"""JSON documents: field-by-field diff, merge patch (RFC 7396) and dotted paths.

Paths are dotted like the scenario validation errors: ``burial.covariates.
present_depth_m.nodes.0``; list items are addressed by their index.
"""

from __future__ import annotations

from typing import Any

MISSING: Any = None  # what "old"/"new" hold for an added/removed entry (see "op")


def json_diff(old: Any, new: Any, prefix: str = "") -> list[dict[str, Any]]:
    """Differences between two JSON values as ``{"path", "op", "old", "new"}`` dicts.

    ``op`` is "change", "add" (``old`` is null) or "remove" (``new`` is null).
    Objects are compared key by key, lists index by index; anything else is
    compared by value (``1`` and ``1.0`` are equal, ``True`` and ``1`` are not).
    """
    out: list[dict[str, Any]] = []
    _diff(old, new, prefix, out)
    return out


def _join(prefix: str, key: Any) -> str:
    return f"{prefix}.{key}" if prefix else str(key)


def _same(a: Any, b: Any) -> bool:
    if isinstance(a, bool) or isinstance(b, bool):
        return type(a) is type(b) and a == b
    return a == b


def _diff(old: Any, new: Any, prefix: str, out: list[dict[str, Any]]) -> None:
    if isinstance(old, dict) and isinstance(new, dict):
        for key in list(old) + [k for k in new if k not in old]:
            path = _join(prefix, key)
            if key not in new:
                out.append({"path": path, "op": "remove", "old": old[key], "new": MISSING})
            elif key not in old:
                out.append({"path": path, "op": "add", "old": MISSING, "new": new[key]})
            else:
                _diff(old[key], new[key], path, out)
        return
    if isinstance(old, list) and isinstance(new, list):
        for i in range(max(len(old), len(new))):
            path = _join(prefix, i)
            if i >= len(new):
                out.append({"path": path, "op": "remove", "old": old[i], "new": MISSING})
            elif i >= len(old):
                out.append({"path": path, "op": "add", "old": MISSING, "new": new[i]})
            else:
                _diff(old[i], new[i], path, out)
        return
    if not _same(old, new):
        out.append({"path": prefix, "op": "change", "old": old, "new": new})


def merge_patch(target: Any, patch: Any) -> Any:
    """Apply a JSON Merge Patch (RFC 7396 section 2) and return the result.

    ``null`` in the patch removes a key; a non-object patch replaces the target.
    """
    if not isinstance(patch, dict):
        return patch
    result = dict(target) if isinstance(target, dict) else {}
    for key, value in patch.items():
        if value is None:
            result.pop(key, None)
        else:
            result[key] = merge_patch(result.get(key), value)
    return result


def resolve_path(doc: Any, path: str) -> tuple[bool, Any]:
    """``(True, value)`` when a dotted path exists in ``doc``, else ``(False, None)``."""
    node = doc
    for part in path.split("."):
        if isinstance(node, dict) and part in node:
            node = node[part]
        elif isinstance(node, list) and part.isdigit() and int(part) < len(node):
            node = node[int(part)]
        else:
            return False, None
    return True, node
