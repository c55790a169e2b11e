"""Text-safety rules for what a fixture writes that reaches a SPICE deck.

This module owns the rules for fixture titles and part names: a part name's form
(:data:`PART_NAME_RE`), the longest title (:data:`TITLE_MAX`), the words of ngspice's
control language refused in both (:data:`CONTROL_WORDS`), and the check that no text
could become a SPICE or control-language line (:func:`_unsafe_text`). The deck writer
sanitises again (:func:`xcheck.deck.safe_text`); this is the first fence.
"""

from __future__ import annotations

import re

from xcheck.fixture_messages import _listing, _show

#: A part name: a letter, then letters, digits or underscores, 32 characters at most.
PART_NAME_RE = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,31}")
#: Longest title accepted (it becomes the deck's first line and a report heading).
TITLE_MAX = 200
#: Words of ngspice's control language that could run commands or open a control block
#: if they ever reached the start of a deck line; refused in titles and part names as
#: whole words, any case. (The deck writer sanitises again; this is the first fence.)
CONTROL_WORDS: frozenset[str] = frozenset(
    {"control", "endc", "shell", "system", "unixcom", "exec"}
)
_DOT_WORD_RE = re.compile(r"(?:^|\s)\.[A-Za-z]")
_WORD_RE = re.compile(r"[A-Za-z_]+")


def title_problem(title: str) -> str | None:
    """Why ``title`` cannot be a fixture's title, or None when it can.

    Parameters
    ----------
    title
        The title as written.

    Returns
    -------
    str or None
        The reason, worded to follow the key and value in a problem (``"is empty"``),
        or None when the title is one non-empty line of safe text of at most
        :data:`TITLE_MAX` characters.
    """
    reason = _unsafe_text(title)
    if reason is None and not title.strip():
        reason = "is empty"
    if reason is None and len(title) > TITLE_MAX:
        reason = f"is longer than {TITLE_MAX} characters"
    return reason


def part_name_problem(name: str) -> str | None:
    """Why ``name`` cannot be a part's name, or None when it can.

    Parameters
    ----------
    name
        The key under ``[parts]``.

    Returns
    -------
    str or None
        The reason, worded to follow the key in a problem, or None when the name
        matches :data:`PART_NAME_RE` and is not one of :data:`CONTROL_WORDS`.
    """
    reason = None
    if not PART_NAME_RE.fullmatch(name):
        reason = (
            "is not a valid part name: it must start with a letter and hold only "
            "letters, digits and underscores, 32 characters at most"
        )
    elif name.lower() in CONTROL_WORDS:
        reason = (
            "is a word of ngspice's control language and may not be used as a "
            "part name"
        )
    return reason


def _unsafe_text(text: str) -> str | None:
    """Why ``text`` could smuggle a line into a SPICE deck, or None when it is safe."""
    bad = [c for c in text if not c.isprintable()]
    if bad:
        return (
            f"holds a line break or control character ({_show(bad[0])}); it must be one "
            "line of printable text"
        )
    stripped = text.lstrip()
    if stripped[:1] in (".", "*", "+"):
        return (
            f"starts with {stripped[0]!r}, which SPICE reads as a dot-command, comment "
            "or continuation line"
        )
    if _DOT_WORD_RE.search(text):
        return "holds a word starting with '.', which looks like a SPICE dot-command"
    words = sorted({w.lower() for w in _WORD_RE.findall(text)} & CONTROL_WORDS)
    if words:
        return (
            f"holds {_listing(words)}, a word of ngspice's control language, which can "
            "run commands"
        )
    return None
