"""``xcheck sweep`` from the command line: the folder it writes, its seed, its errors.

The fixture and capture are the embedded demo (an invented snubber jig, xcheck/demo).
Exit statuses follow the project's convention (common practice for command-line
checkers, no source): 0 done, 2 bad input. The Monte Carlo numbers themselves are
checked against first-order propagation and JCGM 101 in test_montecarlo.py and
test_adaptive.py; here only what the command adds.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from xcheck.cli import main

DEMO = Path(__file__).resolve().parents[2] / "xcheck" / "demo"
FIXTURE = str(DEMO / "fixture.toml")
TRACE = str(DEMO / "trace.csv.gz")


def _sweep(out: Path, *extra: str) -> int:
    return main(["sweep", FIXTURE, "--trace", TRACE, "--runs", "300", "--seed", "9",
                 "--out", str(out), *extra])


def test_the_folder_holds_the_report_the_figure_and_the_numbers(tmp_path: Path, capsys) -> None:
    out = tmp_path / "one"
    assert _sweep(out, "--workers", "1") == 0
    printed = capsys.readouterr().out
    assert sorted(p.name for p in out.iterdir()) == ["band.png", "report.md", "sweep.json"]
    summary = json.loads((out / "sweep.json").read_text(encoding="utf-8"))
    assert summary["seed"] == 9 and summary["engine"] == "exact"
    assert [c["name"] for c in summary["candidates"]] == ["label", "as-measured"]
    report = (out / "report.md").read_text(encoding="utf-8")
    assert "seed of the Monte Carlo draws: 9" in report
    assert "Stored energy can hurt" in report  # the safety note on every report
    # The printed lines name every candidate's trial count and explanation.
    assert "label: 300 trials" in printed and "as-measured: 300 trials" in printed
    assert "explains the frequency" in printed


def test_the_same_seed_gives_the_same_numbers_with_any_worker_count(tmp_path: Path) -> None:
    assert _sweep(tmp_path / "serial", "--workers", "1") == 0
    assert _sweep(tmp_path / "pool", "--workers", "2") == 0
    one, two = (json.loads((tmp_path / f / "sweep.json").read_text(encoding="utf-8"))
                for f in ("serial", "pool"))
    assert one["candidates"] == two["candidates"]


@pytest.mark.parametrize("args, words", [
    (["--runs", "1"], "--runs 1: give at least 2 trials"),
    (["--seed", "-4"], "--seed -4"),
])
def test_bad_options_are_one_paragraph_and_exit_2(tmp_path: Path, capsys, args, words) -> None:
    out = tmp_path / "never"
    status = main(["sweep", FIXTURE, "--out", str(out), *args])
    err = capsys.readouterr().err
    assert status == 2 and words in err and "Traceback" not in err
    assert not out.exists()


def test_a_foreign_out_folder_is_left_alone(tmp_path: Path, capsys) -> None:
    out = tmp_path / "notes"
    out.mkdir()
    (out / "mine.txt").write_text("bench notes", encoding="utf-8")
    status = _sweep(out)
    err = capsys.readouterr().err
    assert status == 2 and "Traceback" not in err and "--out" in err
    assert [p.name for p in out.iterdir()] == ["mine.txt"]
    assert (out / "mine.txt").read_text(encoding="utf-8") == "bench notes"


def test_a_bad_spread_table_names_the_key(tmp_path: Path, capsys) -> None:
    fixture = tmp_path / "jig.toml"
    fixture.write_text(Path(FIXTURE).read_text(encoding="utf-8")
                       + '\n[spread]\ndistribution = "normal"\n', encoding="utf-8")
    status = main(["sweep", str(fixture), "--runs", "10", "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    # A normal spread without the stated number of sigmas is refused: data sheets differ.
    assert status == 2 and "tolerance_is" in err and "jig.toml" in err
    assert "Traceback" not in err and not (tmp_path / "o").exists()
