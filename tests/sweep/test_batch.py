"""``xcheck batch``: pairing, parallel comparison, per-fixture reports, the index.

The captures are invented series-RLC events integrated by scipy.signal.lsim
(xcheck.demo.synth), each with its own seeded noise and its own hidden extra series loss
added to the lossy jig's stated parts (tests/compare_cases.py): the reference for the
fitted extra loss is that hidden truth. Exit statuses follow the project's convention
(common practice for command-line checkers, no source): 0 done, 1 a threshold missed or
a fixture stopped by an error, 2 bad input.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from compare_cases import LOSSY_JIG_TOML, lossy_capture, variant
from xcheck.cli import main
from xcheck.demo.synth import ScopeCapture, capture_trace, peak_table, write_capture_csv
from xcheck.sweep.batch import find_jobs, run_batch

#: The lossy jig's stated series resistance: switch 5 mOhm + ESR 20 mOhm + R1 1 ohm.
STATED = 1.0 + 0.005 + 0.020
#: The broken fixture: a capacitance written with an unknown suffix.
BROKEN_TOML = variant(LOSSY_JIG_TOML, ('nominal = "10u"', 'nominal = "10q"'))


def _capture(seed: int, extra: float) -> ScopeCapture:
    """The lossy jig with ``extra`` ohms of hidden loss, on a short 1 us record."""
    return lossy_capture(seed).with_(resistance=STATED + extra, sample_interval=1e-6,
                                     duration=1.5e-3, pre_event=0.2e-3)


def _write_peaks(path: Path, capture: ScopeCapture) -> None:
    table = peak_table(capture, count=10, time_origin=-0.37e-3, cursor_volts=0.01,
                       cursor_seconds=2e-7)
    lines = ["time [ms],value [V],uncertainty [V]"]
    lines += [f"{t * 1e3:.6f},{v:.4f},0.01" for t, v in table]
    path.write_text("\n".join(lines) + "\n", encoding="ascii")


def _write_fixture(folder: Path, name: str, seed: int, extra: float, ending: str = ".csv",
                   text: str = LOSSY_JIG_TOML) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / f"{name}.toml").write_text(text, encoding="utf-8")
    capture = _capture(seed, extra)
    if ending == ".peaks.csv":
        _write_peaks(folder / f"{name}{ending}", capture)
    else:
        time, volts = capture_trace(capture)
        write_capture_csv(folder / f"{name}{ending}", time, volts)


@pytest.fixture(scope="module")
def twelve(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, dict[str, float]]:
    """A folder of 12 invented fixtures, one broken; some traces gzipped, some peak
    tables, three in a subfolder. Returns the folder and each good fixture's hidden loss."""
    folder = tmp_path_factory.mktemp("bench_jigs")
    truth = {}
    for i in range(11):
        name = f"jig{i:02d}"
        where, shown = (folder / "line2", f"line2/{name}") if i >= 8 else (folder, name)
        ending = (".csv", ".csv.gz", ".csv", ".peaks.csv")[i % 4]
        extra = 0.05 + 0.05 * i
        _write_fixture(where, name, 200 + i, extra, ending)
        truth[shown] = extra
    _write_fixture(folder, "broken", 300, 0.2, text=BROKEN_TOML)
    return folder, truth


@pytest.fixture(scope="module")
def twelve_run(twelve, tmp_path_factory) -> tuple[int, Path]:
    """Exit status and output folder of ``xcheck batch`` on the twelve, two workers."""
    folder, _ = twelve
    out = tmp_path_factory.mktemp("batch_out") / "batch"
    code = main(["batch", str(folder), "--workers", "2", "--no-ngspice", "--max-nrmse", "0.02",
                 "--out", str(out)])
    return code, out


def test_a_broken_fixture_is_one_clear_error_among_eleven_results(twelve, twelve_run) -> None:
    _, truth = twelve
    code, out = twelve_run
    assert code == 1  # one fixture stopped with an error
    data = json.loads((out / "batch.json").read_text(encoding="utf-8"))
    assert data["counts"] == {"fixtures": 12, "pass": 11, "fail": 0, "error": 1, "compared": 11}
    rows = {row["name"]: row for row in data["fixtures"]}
    assert set(rows) == set(truth) | {"broken"}
    broken = rows.pop("broken")
    assert broken["status"] == "error" and broken["report"] is None
    assert "broken.toml" in broken["error"] and "10q" in broken["error"]
    for name, row in rows.items():
        assert row["status"] == "pass" and row["best"] == "extra-loss", name
        # The hidden extra loss within 4 standard errors (the fit's own; the largest of
        # the 11 seeded deviations is about 2.3).
        assert abs(row["value"] - truth[name]) <= 4 * row["stderr"], name
        report = out / row["report"]
        summary = json.loads((report.parent / "summary.json").read_text(encoding="utf-8"))
        assert summary["best"] == row["best"]
        assert summary["candidates"][0]["fitted"]["loop.extra_resistance"] == pytest.approx(
            row["value"], rel=1e-9)  # both rounded to 12 significant digits


def test_the_index_lists_every_fixture_and_the_error(twelve_run) -> None:
    _, out = twelve_run
    index = (out / "index.md").read_text(encoding="utf-8")
    table = [line for line in index.splitlines() if line.startswith("| ") and "report" in line
             or line.startswith("| broken")]
    links = [line for line in table if "[report](reports/" in line]
    assert len(links) == 11
    assert sum("| pass |" in line for line in links) == 11
    [error_row] = [line for line in table if line.startswith("| broken ")]
    assert "**error**" in error_row
    errors = index.split("## Errors", 1)[1]
    assert "**broken**" in errors and "10q" in errors
    assert "[report](reports/line2/jig08/report.md)" in index
    assert (out / "reports" / "line2" / "jig08" / "report.md").is_file()
    assert (out / "values.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature


def test_pairing_rule(tmp_path) -> None:
    _write_fixture(tmp_path, "trace", 1, 0.1)
    _write_fixture(tmp_path, "zipped", 2, 0.1, ".csv.gz")
    _write_fixture(tmp_path, "cursors", 3, 0.1, ".peaks.csv")
    (tmp_path / "alone.toml").write_text(LOSSY_JIG_TOML, encoding="utf-8")
    _write_fixture(tmp_path, "twice", 4, 0.1)
    _write_fixture(tmp_path, "twice", 4, 0.1, ".peaks.csv")
    _write_fixture(tmp_path / ".hidden", "skipped", 5, 0.1)
    jobs = {job.name: job for job in find_jobs(tmp_path)}
    assert sorted(jobs) == ["alone", "cursors", "trace", "twice", "zipped"]
    assert (jobs["trace"].kind, Path(jobs["trace"].measurement).name) == ("trace", "trace.csv")
    assert Path(jobs["zipped"].measurement).name == "zipped.csv.gz"
    assert (jobs["cursors"].kind, Path(jobs["cursors"].measurement).name) == (
        "peaks", "cursors.peaks.csv")
    assert "no measurement beside this fixture; save its capture as alone.csv" in jobs["alone"].problem
    assert "more than one measurement" in jobs["twice"].problem
    assert "twice.csv, twice.peaks.csv" in jobs["twice"].problem


@pytest.fixture(scope="module")
def pair(tmp_path_factory) -> Path:
    """Two invented fixtures, one with markdown and a link in its file name."""
    folder = tmp_path_factory.mktemp("pair")
    _write_fixture(folder, "plain", 31, 0.2)
    _write_fixture(folder, "see [this](x.invalid) |x <b>", 32, 0.3)
    return folder


def test_exit_status_threshold_escaping_and_byte_stable_output(pair, tmp_path,
                                                                     printed) -> None:
    out = tmp_path / "out"
    args = ["batch", str(pair), "--workers", "1", "--no-ngspice", "--out", str(out)]
    assert main(args + ["--max-nrmse", "0.02"]) == 0  # 8-bit noise: NRMSE near 0.25 %
    first = {name: (out / name).read_bytes() for name in ("index.md", "batch.json", "values.png")}
    shown = printed()
    assert "2 fixtures, 0 failed" in shown.out
    assert shown.err == ""  # stderr is not a terminal here: no progress bar
    # User strings are escaped (the markdown escape helper's rules), and the report link
    # is percent-encoded, so a file name cannot break out of it.
    index = first["index.md"].decode("utf-8")
    assert "[this](x" not in index and "|x <b>" not in index
    assert r"| see \[this\]\(x.invalid\) \|x &lt;b&gt; |" in index
    assert "(reports/see%20%5Bthis%5D%28x.invalid%29%20%7Cx%20%3Cb%3E/report.md)" in index
    assert main(args + ["--max-nrmse", "0.0001"]) == 1  # far below the noise: both fail
    assert "fail" in (out / "index.md").read_text(encoding="utf-8")
    assert main(args + ["--max-nrmse", "0.02"]) == 0  # replaces its own earlier output
    for name, data in first.items():
        assert (out / name).read_bytes() == data, name


def test_dask_gives_the_same_batch_as_one_local_worker(pair, dask_address) -> None:
    local = run_batch(pair, workers=1, use_ngspice=False)
    remote = run_batch(pair, cluster=dask_address, use_ngspice=False)
    assert [e.name for e in remote] == [e.name for e in local]
    for a, b in zip(local, remote):
        assert (a.best, a.nrmse, a.value, a.stderr, a.error) == (b.best, b.nrmse, b.value,
                                                                 b.stderr, b.error)
        assert a.files["summary.json"] == b.files["summary.json"]


def test_bad_folders_and_outputs_exit_two(tmp_path, pair, printed) -> None:
    assert main(["batch", str(tmp_path / "missing")]) == 2
    assert "missing: no such folder" in printed().err
    (tmp_path / "empty").mkdir()
    assert main(["batch", str(tmp_path / "empty")]) == 2
    assert "holds no fixture file (*.toml)" in printed().err
    precious = tmp_path / "precious"
    precious.mkdir()
    (precious / "notes.txt").write_text("mine", encoding="utf-8")
    assert main(["batch", str(pair), "--out", str(precious), "--no-ngspice"]) == 2
    assert "was not written by xcheck" in printed().err
    assert (precious / "notes.txt").read_text(encoding="utf-8") == "mine"
    assert main(["batch", str(pair), "--workers", "0"]) == 2
    assert main(["batch", str(pair), "--workers", "2", "--cluster", "tcp://127.0.0.1:1"]) == 2
    assert main(["batch", str(pair), "--max-nrmse", "-1"]) == 2
