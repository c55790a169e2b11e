"""How fixture problems are worded, shared by the modules that read a fixture file.

This module owns the wording helpers of :mod:`xcheck.fixture_reader`,
:mod:`xcheck.fixture_parts` and :mod:`xcheck.fixture_text`: the marker for an absent
key, dotted TOML keys, bad values shown as the user would write them in TOML, listings,
"did you mean" suggestions and unit names, and :class:`_ProblemCollector`, which words
every problem the same way (``key = value: what is wrong; how to fix it``).
"""

from __future__ import annotations

import difflib
import json
import re
from typing import Mapping


class _Missing:
    """Marker for a key that is absent (distinct from any TOML value)."""


_MISSING = _Missing()


class _ProblemCollector:
    """Collects the problems of one document instead of stopping at the first.

    The subclass sets ``problems`` (the list reported) and ``failed`` (keys that
    already have a problem, to avoid knock-on reports) in its ``__init__``.
    """

    problems: list[str]
    failed: set[str]

    # -- reporting -----------------------------------------------------------------

    def problem(self, key: str, value: object, message: str, fix: str) -> None:
        self.failed.add(key)
        if value is _MISSING:  # "probe is missing; ..."
            self.problems.append(f"{key} {message}; {fix}")
        else:  # 'probe = "C9": is not a part ...; ...'
            self.problems.append(f"{key} = {_show(value)}: {message}; {fix}")


def _is_table(value: object) -> bool:
    return isinstance(value, Mapping)


def _key(*segments: str) -> str:
    """A dotted TOML key, quoting segments that are not bare keys."""
    return ".".join(s if _BARE_KEY_RE.fullmatch(s) else _quote(s) for s in segments)


_BARE_KEY_RE = re.compile(r"[A-Za-z0-9_-]+")


def _quote(text: str) -> str:
    """Text in double quotes with control and other non-printable characters escaped."""
    escaped = json.dumps(text, ensure_ascii=False)
    return "".join(c if c.isprintable() else f"\\u{ord(c):04x}" for c in escaped)


def _show(value: object, limit: int = 60) -> str:
    """A bad value as the user would write it in TOML, shortened when long."""
    if isinstance(value, str):
        shown = _quote(value)
    elif isinstance(value, bool):
        shown = "true" if value else "false"
    elif isinstance(value, (int, float)):
        shown = repr(value)
    elif isinstance(value, Mapping):
        items = (f"{_key(str(k))} = {_show(v, 20)}" for k, v in value.items())
        shown = "{ " + ", ".join(items) + " }"
    elif isinstance(value, list):
        shown = "[" + ", ".join(_show(v, 20) for v in value) + "]"
    else:
        shown = _quote(str(value))
    return shown if len(shown) <= limit else shown[: limit - 3] + "..."


def _listing(items: object, word: str = "and") -> str:
    names = [str(i) for i in items]  # type: ignore[attr-defined]
    if len(names) <= 1:
        return "".join(names)
    return ", ".join(names[:-1]) + f" {word} " + names[-1]


def _suggest(word: str, choices: object) -> str:
    """``"did you mean X? "`` for a close or case-only match, else an empty string."""
    options = [str(c) for c in choices]  # type: ignore[attr-defined]
    same_case = [c for c in options if c.lower() == word.lower()]
    close = same_case or difflib.get_close_matches(word, options, n=1, cutoff=0.7)
    return f"did you mean {close[0]}? " if close else ""


def _a(noun: str) -> str:
    """The noun with its indefinite article ("an inductor", "a switch")."""
    return ("an " if noun[:1].lower() in "aeiou" else "a ") + noun


def _unit_name(unit: str) -> str:
    return {
        "F": "farads", "H": "henries", "ohm": "ohms", "V": "volts", "A": "amperes",
        "s": "seconds", "Hz": "hertz",
    }.get(unit, unit)
