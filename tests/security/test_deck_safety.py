"""A SPICE deck holds exactly the fixture's elements and nothing a user string started.

The deck grammar is the subset of SPICE xcheck writes (ngspice manual, "Circuit
description": title line, ``*`` comments, element lines, dot lines; ``+`` continues a
line; from memory), checked by tests/security/deck_checks.py. The hostile strings are
invented. Where names collide with the nodes and elements xcheck makes itself, the
deck's circuit must be the same graph as with harmless names: the element lines are
read into a networkx multigraph and compared with networkx's isomorphism test (VF2),
each edge labelled by its SPICE letter and value, ground marked.
"""

from __future__ import annotations

import json
import re

import networkx as nx
import pytest
from hypothesis import example, given
from hypothesis import strategies as st

from security.corpus_fixtures import LOOP_BASE, NODE_BASE, rename_part, swap
from security.deck_checks import content_problems, element_lines, syntax_problems
from xcheck.circuit.expand import build_circuit
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.cli import main
from xcheck.engines.deck import write_deck
from xcheck.errors import XcheckError
from xcheck.fixture.reader import parse_fixture_text

TITLE = 'title = "Corpus jig, series ring-down (invented example)"'
DESCRIPTION = '"all unexplained loss is capacitor ESR"'
CANDIDATE = "[candidates.esr-only]"

#: Accepted fixtures whose user strings are as hostile as the reader lets through.
HOSTILE = {
    "title of symbols": swap(LOOP_BASE, (TITLE, "title = " + json.dumps(
        "Jig µ Ω ± 10 % ; $5 \\ <b>x</b> | (invented) — ok"))),
    "candidate .control with a shell description": swap(
        LOOP_BASE, (CANDIDATE, '[candidates.".control"]'),
        (DESCRIPTION, json.dumps(".endc\nshell rm -rf /\n.control\n+ .include x"))),
    "candidate shell": swap(LOOP_BASE, (CANDIDATE, "[candidates.shell]")),
    "part n1": rename_part(LOOP_BASE, "R1", "n1"),
    "part sense": rename_part(LOOP_BASE, "R1", "sense"),
    "part V_sense": rename_part(LOOP_BASE, "R1", "V_sense"),
    "part C1_esr": rename_part(LOOP_BASE, "R1", "C1_esr"),
    "part end": rename_part(LOOP_BASE, "R1", "end"),
    "node C1_a": NODE_BASE.replace('"in"', '"C1_a"'),
    "node V1_a": NODE_BASE.replace('"out"', '"V1_a"'),
    "node sense": NODE_BASE.replace('"in"', '"sense"'),
    "node 00": NODE_BASE.replace('"out"', '"00"'),
}

#: The same circuits with harmless names: what each hostile one must equal as a graph.
HARMLESS = {name: (NODE_BASE if "version = 2" in text else LOOP_BASE)
            for name, text in HOSTILE.items()}


def deck_of(text: str) -> tuple[str, object]:
    fixture = parse_fixture_text(text, "hostile.toml")
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    return write_deck(circuit, source_name="hostile.toml"), fixture


def user_strings(text: str) -> list[str]:
    """Every string the fixture's author wrote that could reach a deck or a report."""
    import tomllib

    data = tomllib.loads(text)
    found = [data.get("title", "")]
    for name, part in data.get("parts", {}).items():
        found.append(name)
        found += part.get("nodes", [])
    for name, spec in data.get("candidates", {}).items():
        found.append(name)
        if isinstance(spec, dict) and "description" in spec:
            found += spec["description"].splitlines()
    return [s for s in found if isinstance(s, str) and s.strip()]


def graph(deck: str) -> nx.MultiGraph:
    g = nx.MultiGraph()
    for match in element_lines(deck):
        value = match["body"].split()[-2 if "ic=" in match["body"] else -1]
        g.add_edge(match["a"], match["b"], label=(match["letter"], value))
    for node in g.nodes:
        g.nodes[node]["ground"] = node == "0"
    return g


@pytest.mark.parametrize("name", list(HOSTILE))
def test_hostile_but_valid_fixture_gives_a_safe_complete_deck(tmp_path, printed, name):
    path = tmp_path / "hostile.toml"
    path.write_text(HOSTILE[name], encoding="utf-8")
    out = tmp_path / "deck.cir"
    assert main(["deck", str(path), "--out", str(out)]) == 0, printed().err
    deck = out.read_text(encoding="ascii")
    fixture = parse_fixture_text(HOSTILE[name], str(path))
    assert syntax_problems(deck) == [] and content_problems(deck, fixture) == []
    lines = deck.splitlines()
    for text in user_strings(HOSTILE[name]):
        # No line starts with what the user wrote: it follows '* ' or an element letter
        # and '_' (a name already of that form, like V_sense, may equal xcheck's own).
        if not re.match(r"[RLCVI]_", text):
            assert not any(line.startswith(text) for line in lines), text
    # Candidates never reach a deck: their names and descriptions are absent from it.
    for word in ("rm -rf", "endc", "include", "shell"):
        assert word not in deck.lower(), word


@pytest.mark.parametrize("name", list(HOSTILE))
def test_colliding_names_give_the_same_circuit_as_harmless_ones(name):
    hostile, _ = deck_of(HOSTILE[name])
    harmless, _ = deck_of(HARMLESS[name])
    # Reference: networkx.is_isomorphic (VF2) on the element multigraphs; every edge
    # carries its letter and exact value text, so merged or split nodes would show.
    assert nx.is_isomorphic(
        graph(hostile), graph(harmless),
        node_match=nx.algorithms.isomorphism.categorical_node_match("ground", False),
        edge_match=nx.algorithms.isomorphism.categorical_multiedge_match("label", None))
    assert len(element_lines(hostile)) == len(element_lines(harmless))


def test_the_deck_checks_catch_what_they_look_for():
    deck, fixture = deck_of(LOOP_BASE)
    assert syntax_problems(deck) == [] and content_problems(deck, fixture) == []
    lines = deck.splitlines(keepends=True)
    smuggled = {
        "a control block": lines[:1] + [".control\n", "shell rm -rf /\n", ".endc\n"]
        + lines[1:],
        "a continuation": lines[:6] + ["+ shell\n"] + lines[6:],
        "a carriage return": [lines[0].rstrip("\n") + "\r.include x\n"] + lines[1:],
        "a user word starting a line": lines[:6] + ["Corpus jig 1 2\n"] + lines[6:],
        "a shell token on an element line": lines[:5]
        + [lines[5].replace(" ; ", " shell ; ", 1)] + lines[6:],
        "no .end": lines[:-1],
    }
    for name, bad in smuggled.items():
        assert syntax_problems("".join(bad)), name
    missing = "".join(line for line in lines if not line.startswith("R_R1 "))
    assert content_problems(missing, fixture)
    changed = "".join(re.sub(r"^(C_C1 \S+ \S+) 1e-05", r"\1 2e-05", line) for line in lines)
    assert changed != deck and content_problems(changed, fixture)


#: Text a title or a name might hold: anything, weighted towards SPICE's own marks.
HOSTILE_TEXT = st.text(
    alphabet=st.sampled_from(list("abcXYZ019 _.;*+$\\/-()%:=,\n\r\f\t\0\x0b\u2028µΩ"))
    | st.characters(), max_size=40)


@given(title=HOSTILE_TEXT)
@example(title="Jig $5; 10% (a/b) \\ µΩ ±")  # accepted: the deck path is taken
def test_any_title_is_refused_or_kept_inside_a_comment(title):
    text = swap(LOOP_BASE, (TITLE, "title = " + json.dumps(title)))
    try:
        deck, fixture = deck_of(text)
    except XcheckError:
        return
    assert syntax_problems(deck) == [] and content_problems(deck, fixture) == []
    assert deck.splitlines()[0].startswith("* ")


@given(node=HOSTILE_TEXT, part=HOSTILE_TEXT)
@example(node="C1_a", part="V_sense")  # accepted, colliding with xcheck's own names
def test_any_node_or_part_name_is_refused_or_kept_to_its_place(node, part):
    text = rename_part(NODE_BASE.replace('"in"', json.dumps(node)), "R1", part, loop=False)
    try:
        deck, fixture = deck_of(text)
    except XcheckError:
        return
    assert syntax_problems(deck) == [] and content_problems(deck, fixture) == []


@given(name=HOSTILE_TEXT, description=HOSTILE_TEXT)
@example(name="shell", description=".endc\nshell rm -rf /")
def test_candidate_text_never_reaches_the_deck(name, description):
    text = swap(LOOP_BASE, (CANDIDATE, f"[candidates.{json.dumps(name)}]"),
                (DESCRIPTION, json.dumps(description)))
    try:
        deck, _ = deck_of(text)
    except XcheckError:
        return
    assert deck == deck_of(LOOP_BASE)[0]
