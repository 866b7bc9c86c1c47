"""Write resolved case data back as TOML (the subset case files use)."""
from __future__ import annotations

import math
import re
from typing import Any

_BARE_KEY = re.compile(r"[A-Za-z0-9_\-]+")
_ESCAPES = {"\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r", '"': '\\"', "\\": "\\\\"}


def _string(text: str) -> str:
    """A TOML basic string: any character as itself (UTF-8), control characters escaped.

    Characters outside the basic plane (an emoji) are written as themselves, never as the
    surrogate pairs a JSON writer would give, which TOML does not accept.
    """
    out = []
    for ch in text:
        if ch in _ESCAPES:
            out.append(_ESCAPES[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:  # TOML 1.0: control characters must be escaped
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _key(name: str) -> str:
    return name if _BARE_KEY.fullmatch(name) else _string(name)


def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError(f"cannot write non-finite number {v!r} to TOML")
        return repr(v)
    if isinstance(v, str):
        return _string(v)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def _is_map(v: Any) -> bool:
    return hasattr(v, "items")


def _is_map_list(v: Any) -> bool:
    return isinstance(v, (list, tuple)) and len(v) > 0 and all(_is_map(x) for x in v)


def dumps(data: Any, prefix: str = "") -> str:
    """TOML text of ``data``: every table as a [section], arrays of tables as [[section]]."""
    out = []
    for k, v in data.items():
        if not _is_map(v) and not _is_map_list(v):
            out.append(f"{_key(k)} = {_value(v)}")
    for k, v in data.items():
        name = f"{prefix}{_key(k)}"
        if _is_map(v):
            out.append(f"\n[{name}]")
            body = dumps(v, name + ".")
            if body:
                out.append(body)
        elif _is_map_list(v):
            for item in v:
                out.append(f"\n[[{name}]]")
                body = dumps(item, name + ".")
                if body:
                    out.append(body)
    text = "\n".join(out)
    return text.strip() + "\n" if not prefix else text
