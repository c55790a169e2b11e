"""The compare and demo commands: exit statuses, reports, bad input, no overwrite.

Exit-status convention (common practice for command-line checkers, no source):
0 done, 1 threshold missed, 2 bad input or environment.
"""

from __future__ import annotations

import json
import os
import stat

import pytest

from compare_cases import LOSSY_JIG_TOML, write_peaks, write_trace
from xcheck.cli import main


@pytest.fixture
def fixture_path(tmp_path):
    path = tmp_path / "lossy_jig.toml"
    path.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    return path


def test_compare_writes_the_report_and_exits_zero(tmp_path, fixture_path, printed):
    out = tmp_path / "out"
    code = main(["compare", str(fixture_path), "--trace", str(write_trace(tmp_path, 11)),
                 "--out", str(out), "--no-ngspice"])
    assert code == 0
    for name in ("report.md", "summary.json", "overlay.png", "residuals.png", "envelope.png"):
        assert (out / name).stat().st_size > 0
    captured = printed()
    assert "extra-loss" in captured.out
    assert "fitting candidate" in captured.err  # progress lines go to stderr


def test_max_nrmse_threshold_gives_exit_one(tmp_path, fixture_path, printed):
    out = tmp_path / "out"
    code = main(["compare", str(fixture_path), "--trace", str(write_trace(tmp_path, 11)),
                 "--out", str(out), "--no-ngspice", "--quiet", "--max-nrmse", "0.0001"])
    assert code == 1
    assert "exceeds --max-nrmse" in printed().out
    # A generous threshold passes: 8-bit noise leaves NRMSE well under 2 %.
    assert main(["compare", str(fixture_path), "--trace", str(write_trace(tmp_path, 11)),
                 "--out", str(out), "--no-ngspice", "--quiet", "--max-nrmse", "0.02"]) == 0


def test_compare_from_a_peak_table(tmp_path, fixture_path):
    out = tmp_path / "peaks_report"
    code = main(["compare", str(fixture_path), "--peaks", str(write_peaks(tmp_path, 11)),
                 "--out", str(out), "--quiet"])
    assert code == 0
    data = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert data["best"] == "extra-loss"
    assert data["measured"]["kind"] == "peaks"


def test_an_existing_folder_that_is_not_a_report_is_left_alone(tmp_path, fixture_path, printed):
    out = tmp_path / "precious"
    out.mkdir()
    (out / "notes.txt").write_text("keep me", encoding="utf-8")
    code = main(["compare", str(fixture_path), "--trace", str(write_trace(tmp_path, 11)),
                 "--out", str(out), "--no-ngspice", "--quiet"])
    assert code == 2
    assert (out / "notes.txt").read_text(encoding="utf-8") == "keep me"
    assert sorted(p.name for p in out.iterdir()) == ["notes.txt"]
    err = printed().err
    assert "not an earlier xcheck report" in err and "Traceback" not in err
    assert not list(tmp_path.glob(".precious.*"))  # no staging folder left behind


def test_a_previous_report_is_replaced(tmp_path, fixture_path):
    out = tmp_path / "out"
    args = ["compare", str(fixture_path), "--trace", str(write_trace(tmp_path, 11)),
            "--out", str(out), "--no-ngspice", "--quiet"]
    assert main(args) == 0
    assert main(args) == 0
    assert (out / "summary.json").exists()
    # A colleague can read it: the folder and its files get the modes that os.mkdir and
    # open() give under the same umask (the standard library as reference).
    reference = tmp_path / "plain"
    os.mkdir(reference)
    (reference / "f").write_text("x", encoding="utf-8")
    assert stat.S_IMODE(out.stat().st_mode) == stat.S_IMODE(reference.stat().st_mode)
    for name in ("summary.json", "report.md", "overlay.png"):
        assert stat.S_IMODE((out / name).stat().st_mode) == stat.S_IMODE(
            (reference / "f").stat().st_mode)


@pytest.mark.parametrize(
    "extra_args, message",
    [
        (["--trace", "missing.csv"], r"missing\.csv"),
        (["--trace", "{trace}", "--peaks", "{trace}"], r"not allowed with"),
        ([], r"compare needs a measurement: a trace \(--trace\)"),
        (["--trace", "{trace}", "--event-time", "1M"], r"--event-time.*upper-case 'M'"),
    ],
)
def test_bad_compare_input_gives_one_paragraph_and_exit_two(tmp_path, fixture_path, printed,
                                                            extra_args, message):
    trace = str(write_trace(tmp_path, 11))
    args = [a.replace("{trace}", trace) for a in extra_args]
    code = main(["compare", str(fixture_path), *args, "--out", str(tmp_path / "o"), "--quiet"])
    assert code == 2
    err = printed().err
    assert "Traceback" not in err
    import re

    assert re.search(message, err), err


def test_demo_writes_the_whole_report(tmp_path, printed):
    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out), "--quiet"]) == 0
    data = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    # The demo's hidden truth (xcheck.demo.data.HIDDEN): L = 452 uH; DCR, DC contact
    # resistance and AC loss add 0.18 + 0.03 + 0.09 = 0.30 ohm beyond R1, SW1 and ESR.
    best = data["candidates"][0]
    assert data["best"] == "all-unknowns"
    l_fit, l_err = best["fitted"]["L1.value"], best["fitted_stderr"]["L1.value"]
    assert abs(l_fit - 452e-6) < 3 * l_err
    (group,) = best["undetermined"]
    assert group["combination"] == "sum"
    assert abs(group["value"] - 0.30) < 3 * group["stderr"]
    assert data["seeds"] == {"demo capture noise": 20261202}
    text = (out / "report.md").read_text(encoding="utf-8")
    assert "invented example" in text
    assert "local codes" in text  # the safety caution is always present
