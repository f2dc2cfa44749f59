"""Dotted addresses into a case document (``"coil.upper.path.center.2"``), as sweeps use them."""

from __future__ import annotations


class AddressError(Exception):
    """A sweep key that does not address one value."""


def assign(document: dict[str, object], key: str, value: object) -> None:
    """Set the value at dotted ``key`` of ``document`` in place.

    Raises
    ------
    AddressError
        If a part of ``key`` names nothing, or the address ends at a table or list.

    Examples
    --------
    >>> doc = {"coil": [{"name": "a", "path": {"center": [0, 0, 0]}}]}
    >>> assign(doc, "coil.a.path.center.2", "5 mm")
    >>> doc["coil"][0]["path"]["center"]
    [0, 0, '5 mm']
    """
    parts = key.split(".")
    if parts[0] == "sweep":
        raise AddressError("a sweep cannot change the sweeps")
    node: object = document
    for depth, part in enumerate(parts):
        is_last = depth == len(parts) - 1
        at = ".".join(parts[:depth]) or "the top of the case"
        if isinstance(node, dict):
            if part not in node and not is_last:
                raise AddressError(f"no key {part!r} at {at}")
            if is_last:
                _check_scalar(node.get(part, 0.0), key)
                node[part] = value
                return
            node = node[part]
        elif isinstance(node, list):
            index = _index(node, part, at)
            if is_last:
                _check_scalar(node[index], key)
                node[index] = value
                return
            node = node[index]
        else:
            raise AddressError(f"{at} holds one value, not a table or list")


def _index(items: list[object], part: str, at: str) -> int:
    """Position in a list: the table named ``part``, else a 0-based index."""
    names = [t.get("name") if isinstance(t, dict) else None for t in items]
    if part in names:
        return names.index(part)
    names = [n for n in names if n is not None]
    if part.isdigit() and int(part) < len(items):
        return int(part)
    if names:
        raise AddressError(f"no table named {part!r} at {at} (names: {', '.join(map(str, names))})")
    raise AddressError(f"{at} has {len(items)} items; expected an index from 0 to {len(items) - 1}, got {part!r}")


def _check_scalar(current: object, key: str) -> None:
    if isinstance(current, (dict, list)):
        raise AddressError("addresses a table or list; a sweep changes one number or quantity")
