"""``--force``, the ``--out`` checks made before any work, and the stray temporaries an
interrupted run leaves (xcheck/atomic.py).

What is checked is the project's own contract, not a numerical result: a foreign output
is replaced only with ``--force`` (and then whole, through a temporary sibling swapped
in); a file where a folder goes, a parent that is a file and a read-only parent are
refused in one paragraph with exit status 2 (the project's convention, common practice
for command-line tools, no source); a folder that holds an input is never replaced;
temporaries no process holds (flock(2), POSIX advisory locks, from memory) are removed at
the next write, and one a running process holds is left alone. Fixtures and captures are
the invented lossy jig of tests/compare_cases.py.
"""

from __future__ import annotations

import fcntl
import os
import re
from pathlib import Path

import pytest

from compare_cases import LOSSY_JIG_TOML, write_trace
from xcheck.atomic import remove_stray_temporaries, write_folder_atomically
from xcheck.cli import main

#: How xcheck/atomic.py names a temporary sibling of NAME: ".NAME.<8 hex>.tmp|old".
STRAY = r"\.{name}\.[0-9a-f]{{8}}\.(tmp|old)"

DEMO = Path(__file__).resolve().parents[2] / "xcheck" / "demo"


def _strays(folder: Path, name: str) -> list[str]:
    pattern = re.compile(STRAY.format(name=re.escape(name)))
    return sorted(p.name for p in folder.iterdir() if pattern.fullmatch(p.name))


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _foreign(folder: Path) -> Path:
    folder.mkdir(parents=True)
    (folder / "bench notes.txt").write_text("mine, not xcheck's", encoding="utf-8")
    return folder


@pytest.fixture
def inputs(tmp_path: Path) -> tuple[Path, Path]:
    fixture = tmp_path / "in" / "lossy_jig.toml"
    fixture.parent.mkdir()
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    return fixture, write_trace(fixture.parent, 11)


def _compare(inputs: tuple[Path, Path], out: Path, *extra: str) -> int:
    fixture, trace = inputs
    return main(["compare", str(fixture), "--trace", str(trace), "--out", str(out),
                 "--no-ngspice", "--quiet", *extra])


def _one_paragraph(err: str) -> bool:
    return err.startswith("xcheck: ") and "\n\n" not in err.strip() and "Traceback" not in err


def test_compare_replaces_a_foreign_folder_only_with_force(tmp_path, inputs, printed):
    out = _foreign(tmp_path / "out")
    before = _snapshot(out)
    assert _compare(inputs, out) == 2
    shown = printed()
    assert _one_paragraph(shown.raw_err) and "--force" in shown.err and str(out) in shown.err
    assert _snapshot(out) == before
    assert _compare(inputs, out, "--force") == 0
    printed()
    assert sorted(p.name for p in out.iterdir()) == sorted(
        p.name for p in out.iterdir() if p.suffix in (".md", ".png", ".json"))
    assert (out / "summary.json").is_file() and not (out / "bench notes.txt").exists()
    assert _strays(tmp_path, "out") == []


def test_strays_of_an_interrupted_run_are_removed_and_a_held_one_is_kept(
        tmp_path, inputs, printed):
    out = tmp_path / "out"
    assert _compare(inputs, out) == 0  # an earlier report
    for name in (".out.0badc0de.tmp", ".out.deadbeef.old"):  # as a killed run leaves them
        (tmp_path / name).mkdir()
        (tmp_path / name / "summary.json").write_text("{", encoding="utf-8")
    (tmp_path / ".out.00c0ffee.tmp").write_text("half a file", encoding="utf-8")
    held = tmp_path / ".out.feedface.tmp"  # a run still going holds its lock
    held.mkdir()
    descriptor = os.open(held, os.O_RDONLY)
    fcntl.flock(descriptor, fcntl.LOCK_EX)
    try:
        assert _compare(inputs, out) == 0
        assert _strays(tmp_path, "out") == [held.name]
    finally:
        os.close(descriptor)
    assert _compare(inputs, out) == 0  # the next run, once no process holds it
    printed()
    assert _strays(tmp_path, "out") == []
    # A similar name that is not xcheck's pattern is never touched.
    other = tmp_path / ".out.notours.tmp"
    other.mkdir()
    assert remove_stray_temporaries(out) == [] and other.is_dir()


def test_an_old_folder_left_mid_swap_is_put_back(tmp_path):
    # Killed between moving the old folder aside and moving the new one in: the folder is
    # missing and its earlier content sits in the ".old" sibling.
    folder = tmp_path / "report"
    old = tmp_path / ".report.12345678.old"
    old.mkdir()
    (old / "marker").write_text("earlier", encoding="utf-8")

    def broken(staging: Path) -> None:
        raise RuntimeError("writer failed")

    with pytest.raises(RuntimeError):
        write_folder_atomically(folder, broken, is_ours=lambda p: (p / "marker").exists())
    assert (folder / "marker").read_text(encoding="utf-8") == "earlier"
    assert _strays(tmp_path, "report") == []


@pytest.mark.parametrize("where", ["out is a file", "parent is a file"])
def test_a_file_in_the_way_is_refused_before_any_work(tmp_path, inputs, printed, where):
    blocker = tmp_path / "taken"
    blocker.write_text("a file", encoding="utf-8")
    out = blocker if where == "out is a file" else blocker / "report"
    assert _compare(inputs, out, "--force") == 2
    shown = printed()
    assert _one_paragraph(shown.raw_err) and str(blocker) in shown.err
    assert "folder" in shown.err
    assert blocker.read_text(encoding="utf-8") == "a file"


def _refuses_read_only(tmp_path, inputs, printed, parent: Path) -> None:
    out = parent / "report"
    assert _compare(inputs, out) == 2
    shown = printed()
    assert _one_paragraph(shown.raw_err)
    assert str(parent) in shown.err and "read-only" in shown.err and "--out" in shown.err
    assert not out.exists()


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write a read-only folder")
def test_a_read_only_parent_is_refused(tmp_path, inputs, printed):
    parent = tmp_path / "locked"
    parent.mkdir()
    parent.chmod(0o555)
    try:
        _refuses_read_only(tmp_path, inputs, printed, parent)
    finally:
        parent.chmod(0o755)


def test_a_read_only_parent_is_refused_as_access_reports_it(tmp_path, inputs, printed,
                                                            monkeypatch):
    # Root may write any folder, so a read-only folder is simulated for root: access(2)
    # answers for this folder as it does for another user's 0555 folder.
    parent = tmp_path / "locked"
    parent.mkdir()
    real = os.access

    def access(path, mode, *args, **kwargs):
        if os.path.abspath(path) == str(parent) and mode & os.W_OK:
            return False
        return real(path, mode, *args, **kwargs)

    monkeypatch.setattr(os, "access", access)
    _refuses_read_only(tmp_path, inputs, printed, parent)


@pytest.mark.parametrize("holds", ["the fixture", "the current folder"])
def test_force_never_replaces_a_folder_that_holds_an_input(tmp_path, inputs, printed,
                                                           monkeypatch, holds):
    fixture, trace = inputs
    folder = fixture.parent
    if holds == "the current folder":
        monkeypatch.chdir(folder)
    before = _snapshot(folder)
    assert _compare(inputs, folder, "--force") == 2
    shown = printed()
    assert _one_paragraph(shown.raw_err) and "delete" in shown.err
    assert _snapshot(folder) == before


def test_demo_takes_force(tmp_path, printed):
    out = _foreign(tmp_path / "demo")
    assert main(["demo", "--out", str(out), "--no-ngspice", "--quiet"]) == 2
    assert main(["demo", "--out", str(out), "--no-ngspice", "--quiet", "--force"]) == 0
    printed()
    assert (out / "summary.json").is_file() and not (out / "bench notes.txt").exists()


def test_deck_and_ringdown_replace_a_foreign_file_only_with_force(tmp_path, inputs, printed):
    fixture, trace = inputs
    deck = tmp_path / "mine.cir"
    deck.write_text("* my own deck\n", encoding="utf-8")
    assert main(["deck", str(fixture), "--out", str(deck)]) == 2
    assert deck.read_text(encoding="utf-8") == "* my own deck\n"
    assert main(["deck", str(fixture), "--out", str(deck), "--force"]) == 0
    assert deck.read_text(encoding="utf-8").splitlines()[1].startswith("*")
    assert "my own deck" not in deck.read_text(encoding="utf-8")
    png = tmp_path / "mine.png"
    png.write_bytes(b"not a picture xcheck made")
    assert main(["ringdown", str(trace), "--out", str(png)]) == 2
    assert png.read_bytes() == b"not a picture xcheck made"
    assert main(["ringdown", str(trace), "--out", str(png), "--force"]) == 0
    assert png.read_bytes().startswith(b"\x89PNG\r\n\x1a\n")  # PNG signature (RFC 2083)
    printed()
    assert _strays(tmp_path, "mine.cir") == [] and _strays(tmp_path, "mine.png") == []


@pytest.mark.ngspice
def test_simulate_replaces_foreign_files_only_with_force(tmp_path, inputs, printed):
    fixture, _ = inputs
    out = _foreign(tmp_path / "sim")
    (out / "prediction.csv").write_text("my,own\n", encoding="utf-8")
    assert main(["simulate", str(fixture), "--out", str(out)]) == 2
    assert (out / "prediction.csv").read_text(encoding="utf-8") == "my,own\n"
    assert main(["simulate", str(fixture), "--out", str(out), "--force"]) == 0
    printed()
    assert (out / "prediction.csv").read_text(encoding="utf-8").startswith("time_s,")
    assert (out / "bench notes.txt").is_file()  # simulate writes files, not the folder


def test_batch_and_sweep_take_force(tmp_path, inputs, printed):
    fixture, trace = inputs
    trace.rename(fixture.with_suffix(".csv"))  # the batch's pairing: NAME.toml, NAME.csv
    out = _foreign(tmp_path / "batch")
    args = ["batch", str(fixture.parent), "--workers", "1", "--no-ngspice", "--out", str(out)]
    assert main(args) == 2
    assert main([*args, "--force"]) == 0
    printed()
    assert (out / "batch.json").is_file() and not (out / "bench notes.txt").exists()
    out = _foreign(tmp_path / "sweep")
    args = ["sweep", str(DEMO / "fixture.toml"), "--runs", "20", "--seed", "3", "--workers",
            "1", "--out", str(out)]
    assert main(args) == 2
    assert main([*args, "--force"]) == 0
    printed()
    assert (out / "sweep.json").is_file() and not (out / "bench notes.txt").exists()
