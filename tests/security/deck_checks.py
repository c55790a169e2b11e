"""What a written SPICE deck must be, whatever the fixture held: checks for the corpus.

The deck grammar checked is the subset of SPICE that xcheck writes (ngspice manual,
"Circuit description" and "Basic conventions", from memory): a first line that is the
title, ``*`` comment lines, element lines ``NAME NODE NODE VALUE...`` with an optional
``;`` end-of-line comment, and the dot lines ``.options``, ``.tran`` and ``.end``. A line
anywhere else starting with ``.`` would be a directive (``.control``, ``.include``,
``.lib``), one starting with ``+`` a continuation of the line before. So:

- every character is printable ASCII or the line feed (no carriage return, form feed
  or NUL that a reader could take for a line end);
- every line is a ``* `` comment, an element line whose name begins with its SPICE
  letter and ``_`` (a prefix xcheck chooses, so no user string starts a line), or one
  of the three dot lines, with ``.end`` last and once;
- the part of an element line before ``;`` is names, nodes and numbers only, never a
  word of the control language;
- the deck holds exactly the circuit's elements: as many lines of each SPICE letter as
  the circuit (built from the fixture as ``xcheck deck`` builds it) has elements of
  that kind, names distinct ignoring case (SPICE ignores case), and for every part the
  fixture defines as many lines (named by the part in their comment) as the circuit
  has elements of it, at least one; in circuit order, each line holds its element's
  letter and exact value.
"""

from __future__ import annotations

import re
from collections import Counter
from pathlib import Path

from xcheck.circuit.expand import build_circuit
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.fixture.model import Fixture
from xcheck.fixture.reader import load_fixture

#: Words of ngspice's control language and dot commands that must never be a live
#: token of a line (inside a name such as ``R_V1_source`` they are harmless).
DANGEROUS_WORDS = ("control", "endc", "shell", "system", "exec", "include", "lib",
                   "unixcom", "source")

_NAME = r"[A-Za-z0-9_]+"
_NUMBER = r"[+-]?[0-9]+(?:\.[0-9]+)?(?:e[+-][0-9]+)?"
_ELEMENT_RE = re.compile(
    rf"(?P<name>(?P<letter>[RLCVI])_{_NAME}) (?P<a>{_NAME}) (?P<b>{_NAME}) "
    rf"(?P<body>(?:dc )?{_NUMBER}(?: ic={_NUMBER})?|PULSE\({_NUMBER}(?: {_NUMBER}){{5}}\))"
    r"(?: ; (?P<comment>[A-Za-z0-9 _.,:()/+%-]*))?")
_DOT_LINES = (".options ", ".tran ")


def element_lines(text: str) -> list[re.Match[str]]:
    """The element lines of a deck, matched (lines that are not elements are skipped)."""
    return [m for m in (_ELEMENT_RE.fullmatch(line) for line in text.split("\n")) if m]


def syntax_problems(text: str) -> list[str]:
    """Why ``text`` is not a deck of the safe form (see the module notes)."""
    problems = []
    bad = sorted({c for c in text if c != "\n" and not (" " <= c <= "~")})
    if bad:
        problems.append(f"the deck holds the characters {bad!r}")
    lines = text.split("\n")
    if lines[-1] != "":
        problems.append("the deck does not end in a line feed")
    lines = lines[:-1]
    if not lines or lines[-1] != ".end" or lines.count(".end") != 1:
        problems.append("the deck does not end with one .end line")
    if not lines or not lines[0].startswith("* "):
        problems.append("the first line is not a '* ' comment")
    for number, line in enumerate(lines, 1):
        if line.startswith("* ") or line == ".end" or line.startswith(_DOT_LINES):
            if line.startswith(_DOT_LINES) and not re.fullmatch(r"\.[a-z]+( [a-z0-9=.+-]+)+",
                                                               line):
                problems.append(f"line {number} is not a plain dot line: {line[:80]!r}")
            continue
        match = _ELEMENT_RE.fullmatch(line)
        if match is None:
            problems.append(f"line {number} is neither a comment, an element nor a known "
                            f"dot line: {line[:80]!r}")
            continue
        tokens = set(re.split(r"[\s()=]+", line.split(" ; ")[0].lower()))
        if tokens & set(DANGEROUS_WORDS):
            problems.append(f"line {number} holds a control word outside its comment")
    return problems


def content_problems(text: str, fixture: Fixture) -> list[str]:
    """Why the deck ``text`` does not hold exactly the elements of the fixture's circuit
    (built as ``xcheck deck`` builds it: stated values, stated parasitics)."""
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    found = element_lines(text)
    problems = []
    deck_letters = Counter(m["letter"] for m in found)
    circuit_letters = Counter(e.kind for e in circuit.elements)
    if deck_letters != circuit_letters:
        problems.append(f"the deck's elements by letter {dict(deck_letters)} differ from "
                        f"the circuit's {dict(circuit_letters)}")
    names = [m["name"].lower() for m in found]
    if len(set(names)) != len(names):
        problems.append("two deck elements have the same name ignoring case")
    # In circuit order, each line carries its element's letter and value: the deck
    # writes the shortest digits that read back as the same double (engines/deck.py),
    # so the value must come back exactly (a PULSE source's value is its arguments').
    for match, element in zip(found, circuit.elements):
        body = match["body"].split()
        value = None if body[0].startswith("PULSE") else float(body[-2 if "ic=" in
                                                                 match["body"] else -1])
        if match["letter"] != element.kind or (value is not None and value != element.value):
            problems.append(f"deck line {match['name']} ({match['body']}) is not the "
                            f"circuit's {element.name} ({element.kind} {element.value!r})")
    by_part = Counter((m["comment"] or "").split(" ")[0] for m in found)
    circuit_parts = Counter(e.part for e in circuit.elements)
    for part in fixture.parts:
        if by_part[part] != circuit_parts[part] or by_part[part] < 1:
            problems.append(f"part {part}: {by_part[part]} deck lines, "
                            f"{circuit_parts[part]} circuit elements")
    return problems


def deck_problems(deck_path: Path, fixture_path: Path, fixture_bytes: bytes) -> list[str]:
    """Every problem of the deck at ``deck_path`` written from ``fixture_path``.

    Parameters
    ----------
    deck_path
        The written deck.
    fixture_path
        The fixture it was written from.
    fixture_bytes
        The fixture's bytes (unused beyond a check that the file still holds them).

    Returns
    -------
    list of str
        Empty when the deck is safe and complete.
    """
    if not deck_path.is_file():
        return ["exit status 0 but no deck was written"]
    text = deck_path.read_bytes().decode("ascii", errors="replace")
    problems = syntax_problems(text)
    if fixture_path.read_bytes() != fixture_bytes:
        problems.append("the fixture changed")
    return problems + content_problems(text, load_fixture(fixture_path))
