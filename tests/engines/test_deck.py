"""SPICE deck text: numbers, sanitising, layout, golden decks, and ngspice reading it.

References outside xcheck:

- ngspice 39 itself (through PySpice's shared-library mode, in a child process): it
  must load every deck, strip the ``;`` comments, run the golden decks, and must *not*
  run a shell command smuggled in through a title or name (while a naively written deck
  with the same title does run it, which shows the check can fail).
- Series RLC natural response and RC step response formulas (Nilsson & Riedel,
  "Electric Circuits", chapters on RC/RL and RLC natural and step responses, from
  memory), used only to check the deck's wiring, polarity and initial conditions; the
  1e-4 accuracy of the engines is tested with the engines.
- Python's float parser for the round trip of the number format (IEEE 754 double).

Golden decks: ``netlists/*.cir`` are regenerated from ``examples/*.toml`` and compared
exactly. After an intended change, update them with
``XCHECK_UPDATE_GOLDEN=1 python -m pytest tests/test_deck.py`` (or run
``xcheck deck examples/<name>.toml`` from the repository root) and review the diff.
"""

from __future__ import annotations

import json
import math
import os
import random
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from xcheck import cli
from xcheck.circuit.model import Circuit, Element
from xcheck.engines.deck import (
    DEFAULT_OPTIONS,
    deck_names,
    is_xcheck_deck,
    safe_text,
    spice_number,
    tran_values,
    write_deck,
)
from xcheck.circuit.expand import build_circuit
from xcheck.fixture.model import Fixture, Part, StepSource
from xcheck.fixture.reader import load_fixture
from xcheck.circuit.parameters import parameters_from_fixture
from xcheck.engines.timing import transient_settings

ROOT = Path(__file__).resolve().parents[2]
GOLDEN = ("film_ringdown", "lc_filter_step")

# --------------------------------------------------------------------------------------
# ngspice in a child process (its shared library keeps global state and may crash)
# --------------------------------------------------------------------------------------

_RUNNER = r"""
import json, sys
import numpy as np
from PySpice.Spice.NgSpice.Shared import NgSpiceShared

tasks = json.loads(sys.argv[1])
ng = NgSpiceShared.new_instance()
results = []
for task in tasks:
    result = {"listing": "", "error": ""}
    try:
        with open(task["deck"], encoding="utf-8") as handle:
            ng.load_circuit(handle.read())
        result["listing"] = ng.exec_command("listing")
        if task.get("out"):
            ng.run()
            plot = ng.plot(None, ng.last_plot)
            arrays = {k.lower(): np.asarray(v._data).real for k, v in plot.items()}
            np.savez(task["out"], **arrays)
        ng.remove_circuit()
        ng.destroy()
    except Exception as exc:  # reported to the test, which decides
        result["error"] = f"{type(exc).__name__}: {exc}"
    results.append(result)
with open(sys.argv[2], "w", encoding="utf-8") as handle:
    json.dump(results, handle)
"""


def run_ngspice(tmp_path: Path, tasks: list[dict[str, str]]) -> list[dict[str, str]]:
    """Load (and, when ``out`` is given, run) decks in one child ngspice session."""
    report = tmp_path / "ngspice_report.json"
    try:
        done = subprocess.run(
            [sys.executable, "-c", _RUNNER, json.dumps(tasks), str(report)],
            capture_output=True, text=True, timeout=120, check=False,
        )
    except subprocess.TimeoutExpired:  # pragma: no cover - only on a broken install
        pytest.fail("ngspice did not finish within 120 s")
    if done.returncode != 0 and "cannot load" in (done.stderr + done.stdout).lower():
        pytest.skip("the ngspice shared library is not installed (libngspice0-dev)")
    assert done.returncode == 0, f"ngspice child failed:\n{done.stdout}\n{done.stderr}"
    return json.loads(report.read_text(encoding="utf-8"))


def vector(data: np.lib.npyio.NpzFile, node: str) -> np.ndarray:
    """Node voltage from an ngspice run (ground is not stored: zeros)."""
    if node == "0":
        return np.zeros_like(data["time"])
    # PySpice names a node "v(1)" when it is a number, else by the bare name.
    key = node.lower()
    return data[key] if key in data else data[f"v({key})"]


# --------------------------------------------------------------------------------------
# Numbers
# --------------------------------------------------------------------------------------

_EXPONENT_FORM = re.compile(r"0|-?[1-9](\.[0-9]+)?e[+-][0-9]{2,3}")


def test_spice_number_examples() -> None:
    assert spice_number(4.7e-05) == "4.7e-05"
    assert spice_number(12.0) == "1.2e+01"
    assert spice_number(0.0) == "0"
    assert spice_number(-0.005) == "-5e-03"
    assert spice_number(np.float64(0.6324555320336759)) == "6.324555320336759e-01"
    assert spice_number(1e6) == "1e+06"  # never "1M" / "1meg"
    with pytest.raises(ValueError, match="expected a finite number"):
        spice_number(float("inf"))


def test_spice_number_round_trips_exactly() -> None:
    # Reference: Python's float() (correctly rounded IEEE 754 parsing).
    rng = random.Random(20240601)
    values = [0.1, 1 / 3, 0.291 - 0.058, 5e-324, 1.7976931348623157e308]
    values += [rng.uniform(1, 10) * 10.0 ** rng.randint(-18, 12) for _ in range(2000)]
    for value in values:
        text = spice_number(value)
        assert _EXPONENT_FORM.fullmatch(text), text
        assert float(text) == value, (value, text)  # exact: same double back


def test_tran_values_round_only_towards_safety() -> None:
    settings = transient_settings(_rlc_circuit())
    step, stop, max_step = tran_values(settings)
    # Rounded down to 3 significant digits: at most 1 % smaller, never larger.
    assert settings.max_step * (1 - 1e-2) <= max_step <= settings.max_step
    assert step <= settings.step
    # Rounded up to 4 significant digits: at most 0.1 % longer, never shorter.
    assert settings.stop <= stop <= settings.stop * (1 + 1e-3)
    assert len(spice_number(max_step).split("e")[0].replace(".", "").lstrip("-")) <= 3


# --------------------------------------------------------------------------------------
# Sanitising
# --------------------------------------------------------------------------------------

HOSTILE = (
    "ring\n.control\nshell touch {marker}\n.endc\n+ R9 1 0 1\r* x ; y $ z"
    "\u2028.include /etc/passwd\u0085\x0b\x0c\x1c\x1d\x1e{{x}}'q'\"dq\"\\ \t*ng_script"
)
_LINE_SEPARATORS = "\n\r\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029"


def test_safe_text_keeps_nothing_that_can_break_a_line() -> None:
    text = safe_text(HOSTILE.format(marker="/tmp/x"))
    assert not set(text) & set(_LINE_SEPARATORS + ";$*'\"{}\\\t")
    assert re.fullmatch(r"[A-Za-z0-9 _.,:()/+%-]*", text)
    assert not text.startswith((".", "+", "-", " "))
    assert safe_text(".control") == "control"
    assert safe_text("Film ring-down, jig B (invented example)") == (
        "Film ring-down, jig B (invented example)"
    )
    assert len(safe_text("x" * 500)) == 100
    # Units keep their meaning: "47 µF" must not become "47 F".
    assert safe_text("47 \u00b5F, 412 m\u2126, \u00b110 %, Jig \u00e9t\u00e9") == "47 uF, 412 mohm, +-10 %, Jig ete"


def _hostile_circuit(marker: Path) -> Circuit:
    """A valid RC loop whose every string is hostile, built directly (as if the fixture
    parser had let everything through)."""
    evil = HOSTILE.format(marker=marker)
    elements = (
        Element(f"V{evil}", "V", ("0", f"a{evil}"), 0.0, part=evil, role=evil, origin=evil),
        Element(f"R{evil}", "R", (f"a{evil}", "gnd"), 1e3, part=evil, role="value", origin=evil),
        Element("x" + evil, "C", ("gnd", "0"), 1e-6, initial=1.0, part=evil, role=evil, origin=evil),
    )
    return Circuit(
        title=evil, elements=elements, probe=("gnd", "0"), response=evil,
        current_sense=f"V{evil}", source=evil,
    )


_ALLOWED_LINE = re.compile(
    r"\* [A-Za-z0-9 _.,:()/+%;=-]*"  # header comments (';' and '=' from xcheck's own text)
    r"|[RLCV][A-Za-z0-9_]* [A-Za-z0-9_]+ [A-Za-z0-9_]+ (dc )?[-+.e0-9]+( ic=[-+.e0-9]+)?"
    r"( ; [A-Za-z0-9 _.,:()/+%-]*)?"
    r"|\.options [a-z0-9_=+.\- ]+|\.tran [-+.e0-9 ]+ uic|\.end"
)


def test_hostile_strings_cannot_add_lines(tmp_path: Path) -> None:
    deck = write_deck(_hostile_circuit(tmp_path / "pwned"), stop_time=1e-3)
    lines = deck.split("\n")
    assert lines[-1] == "" and deck.splitlines() == lines[:-1]  # no hidden separators
    for line in lines[:-1]:
        assert _ALLOWED_LINE.fullmatch(line), line
    assert [line.split()[0] for line in lines if line.startswith(".")] == [".options", ".tran", ".end"]
    # The title line is the user's text only, after "* " (never "*ng_script").
    assert re.fullmatch(r"\* [A-Za-z0-9 _.,:()/+%-]+", lines[0]), lines[0]
    names = deck_names(_hostile_circuit(tmp_path / "pwned"))
    # Node "gnd" is ngspice's ground alias: it must not survive as a node name.
    assert "gnd" not in {n.lower() for n in names.nodes.values()}
    assert len({n.lower() for n in names.elements.values()}) == 3
    assert names.probe[1] == "0" and names.probe[0] != "0"


@pytest.mark.ngspice
def test_ngspice_does_not_run_what_a_hostile_fixture_wrote(tmp_path: Path) -> None:
    marker = tmp_path / "pwned"
    safe = tmp_path / "safe.cir"
    safe.write_text(write_deck(_hostile_circuit(marker), stop_time=1e-3), encoding="utf-8")
    # Control: the same title written naively into a deck does run the shell command
    # (ngspice executes .control blocks of a loaded circuit), so the check can fail.
    naive_marker = tmp_path / "naive_pwned"
    naive = tmp_path / "naive.cir"
    naive.write_text(
        f"* ring\n.control\nshell touch {naive_marker}\n.endc\nR1 1 0 1\nV1 1 0 dc 1\n.end\n",
        encoding="utf-8",
    )
    results = run_ngspice(tmp_path, [{"deck": str(safe)}, {"deck": str(naive)}])
    assert results[0]["error"] == ""
    assert not marker.exists()
    assert naive_marker.exists()
    # What ngspice parsed: its ground alias, the three elements and the three dot
    # lines xcheck wrote; no .control, .include, shell or continuation line.
    parsed = [
        line.split(" : ", 1)[1].split()[0]
        for line in results[0]["listing"].lower().splitlines()
        if " : " in line
    ]
    assert sorted(p[0] if p[0] != "." else p for p in parsed) == sorted(
        [".global", "v", "r", "c", ".tran", ".options", ".end"]
    )


# --------------------------------------------------------------------------------------
# Layout
# --------------------------------------------------------------------------------------


def _loop_fixture(parts: list[Part], **fields: object) -> Fixture:
    base: dict[str, object] = dict(
        title="RLC check (invented)", response="natural", loop=tuple(p.name for p in parts),
        probe=parts[1].name, parts={p.name: p for p in parts},
    )
    base.update(fields)
    return Fixture(**base)  # type: ignore[arg-type]


R_, L_, C_, V0 = 2.0, 1e-3, 1e-6, 10.0


def _rlc_circuit() -> Circuit:
    parts = [
        Part("SW1", "switch"),
        Part("C1", "capacitor", nominal=C_, initial=V0),
        Part("R1", "resistor", nominal=R_),
        Part("L1", "inductor", nominal=L_),
    ]
    fixture = _loop_fixture(parts)
    return build_circuit(fixture, parameters_from_fixture(fixture))


def test_deck_layout() -> None:
    circuit = _rlc_circuit()
    deck = write_deck(circuit, stop_time=2e-3, source_name="examples/x.toml")
    lines = deck.splitlines()
    assert lines[0] == "* RLC check (invented)"
    assert is_xcheck_deck(deck)
    assert "generated, do not edit" in lines[1]
    assert lines[2] == "* fixture: examples/x.toml"
    assert lines[3] == "* response: natural; probe: v(n1) - v(n2); loop current: i(V_SW1) in loop order"
    body = [line for line in lines if line[0] in "RLCV"]
    assert [line.split()[0] for line in body] == [e.name for e in circuit.elements]
    assert body[0] == "V_SW1 0 n1 dc 0 ; SW1 ideal switch as a 0 V source, no closed resistance given, loop current sense"
    assert body[1] == "C_C1 n1 n2 1e-06 ic=1e+01 ; C1 capacitance, label value"
    assert body[3] == "L_L1 n3 0 1e-03 ic=0 ; L1 inductance, label value"
    options = " ".join(f"{k}={spice_number(v)}" for k, v in DEFAULT_OPTIONS.items())
    assert lines[-3] == f".options method=trap {options}"
    step, stop, max_step = tran_values(transient_settings(circuit, stop_time=2e-3))
    assert lines[-2] == f".tran {spice_number(step)} {spice_number(stop)} 0 {spice_number(max_step)} uic"
    assert lines[-1] == ".end"
    assert write_deck(circuit, stop_time=2e-3, source_name="examples/x.toml") == deck
    assert not is_xcheck_deck("* my own deck\nR1 1 0 1\n")


# --------------------------------------------------------------------------------------
# Golden decks and ngspice
# --------------------------------------------------------------------------------------


def _golden_text(name: str) -> str:
    fixture = load_fixture(ROOT / "examples" / f"{name}.toml")
    circuit = build_circuit(fixture, parameters_from_fixture(fixture))
    return write_deck(circuit, source_name=f"examples/{name}.toml")


@pytest.mark.parametrize("name", GOLDEN)
def test_golden_deck_matches(name: str) -> None:
    path = ROOT / "netlists" / f"{name}.cir"
    text = _golden_text(name)
    if os.environ.get("XCHECK_UPDATE_GOLDEN") == "1":
        path.write_text(text, encoding="utf-8", newline="\n")
    assert path.read_text(encoding="utf-8") == text, (
        f"{path} is out of date; if the change is intended, run "
        "XCHECK_UPDATE_GOLDEN=1 python -m pytest tests/test_deck.py and review the diff"
    )


@pytest.mark.ngspice
def test_golden_decks_load_and_run_in_ngspice(tmp_path: Path) -> None:
    tasks = [
        {"deck": str(ROOT / "netlists" / f"{name}.cir"), "out": str(tmp_path / f"{name}.npz")}
        for name in GOLDEN
    ]
    results = run_ngspice(tmp_path, tasks)
    for name, result in zip(GOLDEN, results):
        assert result["error"] == "", result["error"]
        fixture = load_fixture(ROOT / "examples" / f"{name}.toml")
        circuit = build_circuit(fixture, parameters_from_fixture(fixture))
        text = (ROOT / "netlists" / f"{name}.cir").read_text(encoding="utf-8")
        # ngspice 39 strips the ';' comments and keeps every element.
        listing = result["listing"].lower()
        assert ";" not in listing and "parasitic" not in listing
        for element in circuit.elements:
            assert f" {element.name.lower()} " in listing, element.name
        data = np.load(tmp_path / f"{name}.npz")
        time = data["time"]
        stop = float(text.splitlines()[-2].split()[2])
        assert time[-1] == pytest.approx(stop, rel=1e-9)  # ngspice ends on tstop exactly
        probe = vector(data, circuit.probe[0]) - vector(data, circuit.probe[1])
        # With uic ngspice 39 does not print t = 0; its first point comes 1 % of a step
        # later. By then the probe can have left the deck's ic= value (12 V or 0 V)
        # by far less than 1e-3 of the reference voltage; a lost ic= would be off by all.
        max_step = float(text.splitlines()[-2].split()[4])
        assert 0 < time[0] <= 0.02 * max_step
        capacitor = next(e for e in circuit.elements if e.part == fixture.probe and e.kind == "C")
        reference = max(abs(e.value) for e in circuit.elements if e.kind == "V") or capacitor.initial
        reference = max(reference, abs(capacitor.initial or 0.0))
        assert probe[0] == pytest.approx(capacitor.initial, abs=1e-3 * reference)
        assert np.all(np.isfinite(probe)) and f"{circuit.current_sense.lower()}#branch" in data


@pytest.mark.ngspice
def test_deck_wiring_matches_circuit_theory(tmp_path: Path) -> None:
    """Series RLC natural response and an RC step through a leaky capacitor, run by
    ngspice from decks written here, against the textbook formulas (Nilsson & Riedel,
    from memory). Tolerance 2e-4 of the scale: the deck's automatic step aims at 1e-4
    (2.5e-5 measured here), while a wiring, sign or ic mistake is off by the order of
    the whole signal."""
    rlc = _rlc_circuit()
    rlc_deck = tmp_path / "rlc.cir"
    rlc_deck.write_text(write_deck(rlc, stop_time=2e-3), encoding="utf-8")

    rs, r1, rleak, cap, volts = 0.1, 1e3, 1e3, 1e-6, 10.0
    parts = [Part("R1", "resistor", nominal=r1),
             Part("C1", "capacitor", nominal=cap, parasitics={"leakage": rleak})]
    fixture = _loop_fixture(parts, response="step", step=StepSource(volts, rs))
    rc = build_circuit(fixture, parameters_from_fixture(fixture))
    rc_deck = tmp_path / "rc.cir"
    rc_deck.write_text(write_deck(rc, stop_time=10e-3), encoding="utf-8")

    results = run_ngspice(tmp_path, [
        {"deck": str(rlc_deck), "out": str(tmp_path / "rlc.npz")},
        {"deck": str(rc_deck), "out": str(tmp_path / "rc.npz")},
    ])
    assert [r["error"] for r in results] == ["", ""]

    data = np.load(tmp_path / "rlc.npz")
    t = data["time"]
    v = vector(data, rlc.probe[0]) - vector(data, rlc.probe[1])
    i = data[deck_names(rlc).current_vector]
    alpha, w0 = R_ / (2 * L_), 1 / math.sqrt(L_ * C_)
    wd = math.sqrt(w0**2 - alpha**2)
    v_book = V0 * np.exp(-alpha * t) * (np.cos(wd * t) + alpha / wd * np.sin(wd * t))
    # Loop current in loop order with v_C first-minus-second terminal: i = C dv/dt.
    i_book = -V0 / (wd * L_) * np.exp(-alpha * t) * np.sin(wd * t)
    assert t[-1] > 9 * 2 * math.pi / wd  # about ten periods
    assert np.max(np.abs(v - v_book)) <= 2e-4 * V0
    assert np.max(np.abs(i - i_book)) <= 2e-4 * V0 / (wd * L_)

    data = np.load(tmp_path / "rc.npz")
    t = data["time"]
    v = vector(data, rc.probe[0]) - vector(data, rc.probe[1])
    i = data[deck_names(rc).current_vector]
    final = volts * rleak / (rleak + r1 + rs)  # voltage divider
    tau = cap * rleak * (r1 + rs) / (rleak + r1 + rs)  # C times the Thevenin resistance
    assert np.max(np.abs(v - final * (1 - np.exp(-t / tau)))) <= 2e-4 * volts
    # Source positive towards the first part: current flows round the loop in order.
    # Kirchhoff's voltage law holds at every solved point to the solver's tolerance
    # (reltol 1e-6), so 1e-6 of the scale.
    assert np.max(np.abs(i - (volts - v) / (r1 + rs))) <= 1e-6 * volts / (r1 + rs)


# --------------------------------------------------------------------------------------
# xcheck deck FIXTURE [--out PATH]
# --------------------------------------------------------------------------------------


@pytest.fixture
def deck_only(monkeypatch: pytest.MonkeyPatch) -> None:
    """Register only the deck subcommand, so these tests do not depend on the others."""
    monkeypatch.setattr(cli, "COMMANDS", {"deck": cli.COMMANDS["deck"]})


def test_command_writes_default_path(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, printed, deck_only: None
) -> None:
    monkeypatch.chdir(tmp_path)
    fixture = ROOT / "examples" / "lc_filter_step.toml"
    assert cli.main(["deck", str(fixture)]) == 0
    out = tmp_path / "netlists" / "lc_filter_step.cir"
    assert printed().out.startswith("wrote netlists/lc_filter_step.cir: 10 elements")
    text = out.read_text(encoding="utf-8")
    assert is_xcheck_deck(text) and text.endswith(".end\n")
    # Rewriting its own deck is allowed; no temporary file is left behind.
    assert cli.main(["deck", str(fixture)]) == 0
    assert sorted(p.name for p in out.parent.iterdir()) == ["lc_filter_step.cir"]


def test_command_from_repository_root_reproduces_golden_deck(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, deck_only: None
) -> None:
    monkeypatch.chdir(ROOT)
    out = tmp_path / "film.cir"
    assert cli.main(["deck", "examples/film_ringdown.toml", "--out", str(out)]) == 0
    assert out.read_text(encoding="utf-8") == (ROOT / "netlists" / "film_ringdown.cir").read_text(
        encoding="utf-8"
    )


def test_command_refuses_to_overwrite_a_foreign_file(
    tmp_path: Path, printed, deck_only: None
) -> None:
    precious = tmp_path / "mine.cir"
    precious.write_text("* my hand-made deck\nR1 1 0 1\n.end\n", encoding="utf-8")
    status = cli.main(["deck", str(ROOT / "examples" / "film_ringdown.toml"), "--out", str(precious)])
    assert status == 2
    err = printed().err
    assert re.search(r"mine\.cir: this file exists and was not written by xcheck", err)
    assert "nothing was written" in err
    assert precious.read_text(encoding="utf-8") == "* my hand-made deck\nR1 1 0 1\n.end\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["mine.cir"]


def test_command_reports_bad_fixture_and_folder(
    tmp_path: Path, printed, deck_only: None
) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(
        'title = "t"\nresponse = "natural"\nloop = ["C1", "L1"]\nprobe = "C1"\n'
        '[parts.C1]\nkind = "capacitor"\nnominal = "1u"\ninitial = "5"\n'
        '[parts.L1]\nkind = "inductor"\nnominal = "?"\n',
        encoding="utf-8",
    )
    assert cli.main(["deck", str(bad), "--out", str(tmp_path / "x.cir")]) == 2
    assert re.search(r"part 'L1' \(inductor\).*must be given", printed().err)
    assert not (tmp_path / "x.cir").exists()
    assert cli.main(["deck", str(ROOT / "examples" / "film_ringdown.toml"), "--out", str(tmp_path)]) == 2
    assert "is a folder" in printed().err
