"""``xcheck compare`` end to end against its unavoidable parts, at growing record lengths.

An invented fixture (a charged 10 uF film capacitor released into 1.3 ohm and 220 uH,
stated values only, default candidates) and, per size, an invented capture of the same
event sampled more finely: 1 ms of pre-trigger and 4 ms after the switch closes (a
3.4 kHz ring decaying with alpha = 2955 /s), 20 mV of white noise, 12-bit quantisation
over -10 V to 14 V, seeded. Each size runs ``python -m xcheck compare`` in a fresh
child process; the figures are:

- wall time of the child, and its peak resident memory: the largest ``ru_maxrss`` of
  the processes it waited for (``resource.getrusage(RUSAGE_CHILDREN)``). Linux copies a
  parent's high-water mark into a forked child, so the compare process is started by a
  small launcher interpreter (``-c``, standard library only), not by this process: the
  launcher's own few MB are then the floor, not this benchmark's footprint. The figure
  is the largest single process of the run (compare itself, or its ngspice child),
  not their sum.
- the growth exponent: the slope of log(wall time) against log(samples), least
  squares over the sizes; goal <= 1.0 (nothing worse than linear in n).
- the ratio of the wall time to the sum of its unavoidable parts, measured in another
  fresh child: one read of the file with the project's reader
  (:func:`xcheck.capture.scope_csv.read_trace`) and one ngspice run per candidate the
  comparison evaluated (each candidate's circuit at the stated values, run over the
  fit window, the ngspice child's start-up included, as compare pays it); goal <= 2 at
  every size.

Usage: python -m benchmarks.bench_compare [--sizes 10000 100000 1000000] [--keep DIR]
"""

from __future__ import annotations

import argparse
import json
import math
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from benchmarks.table import INFO, MISSED, NOT_MEASURED, Row, judged

REPO = Path(__file__).resolve().parent.parent
EXPONENT_GOAL = 1.0
RATIO_GOAL = 2.0
SEED = 20261204
#: The invented event (SI): series R, L, C, initial voltage, record before and after.
R_LOOP, L_LOOP, C_LOOP, V0 = 1.3, 220e-6, 10e-6, 12.0
PRE_EVENT, AFTER_EVENT = 1e-3, 4e-3
NOISE, FULL_SCALE, BITS = 0.02, (-10.0, 14.0), 12
#: Rows written per chunk (keeps the generator's memory flat at any size).
CHUNK = 1_000_000

FIXTURE = """\
# Benchmark fixture: INVENTED. No real part, jig or measurement is described.
title = "Film capacitor ring-down, benchmark jig (invented example)"
response = "natural"
loop = ["C1", "R1", "L1"]
probe = "C1"

[parts.C1]
kind = "capacitor"
nominal = "10u"
initial = "12"

[parts.R1]
kind = "resistor"
nominal = "1.3"

[parts.L1]
kind = "inductor"
nominal = "220u"
"""

#: Runs one command and prints its wall time and the peak RSS of what it waited for.
#: Standard library only, so that this interpreter stays small (see the module
#: docstring).
LAUNCHER = """\
import json, resource, subprocess, sys, time
command = json.loads(sys.argv[1])
start = time.perf_counter()
done = subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
wall = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss * 1024
print(json.dumps({"wall_s": wall, "peak_rss_bytes": peak, "status": done.returncode,
                  "stderr": done.stderr[-2000:]}))
"""


def clean_volts(time_s: np.ndarray) -> np.ndarray:
    """The invented event's capacitor voltage (V): V0 before the switch closes, then
    the underdamped series RLC natural response with zero initial current,
    ``V0 exp(-alpha t) (cos(wd t) + alpha / wd sin(wd t))`` (standard circuit theory,
    from memory)."""
    alpha = R_LOOP / (2 * L_LOOP)
    omega_d = math.sqrt(1.0 / (L_LOOP * C_LOOP) - alpha**2)
    t = np.clip(time_s, 0.0, None)
    ring = V0 * np.exp(-alpha * t) * (np.cos(omega_d * t) + alpha / omega_d * np.sin(omega_d * t))
    return np.where(time_s < 0, V0, ring)


def write_trace(path: Path, samples: int, seed: int = SEED) -> None:
    """Write the invented capture with ``samples`` rows (plain CSV, short preamble).

    Parameters
    ----------
    path
        File to write.
    samples
        Rows of data; the record always spans ``PRE_EVENT + AFTER_EVENT`` seconds.
    seed
        Seed of the noise.
    """
    interval = (PRE_EVENT + AFTER_EVENT) / samples
    rng = np.random.default_rng(seed)
    lsb = (FULL_SCALE[1] - FULL_SCALE[0]) / (2**BITS - 1)
    with open(path, "w", encoding="ascii") as handle:
        handle.write("Instrument,invented bench oscilloscope (benchmark data)\n")
        handle.write(f"Sample interval,{interval:.6e}\n")
        handle.write("time [s],CH1 [V]\n")
        for start in range(0, samples, CHUNK):
            k = np.arange(start, min(samples, start + CHUNK))
            t = -PRE_EVENT + k * interval
            v = clean_volts(t) + NOISE * rng.standard_normal(k.size)
            code = np.clip(np.round((v - FULL_SCALE[0]) / lsb), 0, 2**BITS - 1)
            volts = FULL_SCALE[0] + lsb * code
            np.savetxt(handle, np.column_stack((t, volts)), fmt=("%.9e", "%.5f"), delimiter=",")


def _run_launched(command: list[str]) -> dict:
    """Run ``command`` under the small launcher; its wall time and peak RSS."""
    out = subprocess.run([sys.executable, "-c", LAUNCHER, json.dumps(command)], cwd=REPO,
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def compare_once(fixture: Path, trace: Path, out: Path) -> dict:
    """``xcheck compare`` in a fresh process: wall time (s), peak RSS (bytes), status,
    and its progress lines (stderr), whose time stamps give the stages."""
    return _run_launched([sys.executable, "-m", "xcheck", "compare", str(fixture),
                          "--trace", str(trace), "--out", str(out), "--force"])


#: A progress line of ``xcheck compare``: ``[  1.2 s] what starts now``.
PROGRESS_LINE = re.compile(r"^\[\s*([0-9.]+) s\] (.*)$")


def stages(stderr: str) -> dict[str, float]:
    """Seconds from compare's progress lines: the measurement (read, align, estimate),
    the fits, ngspice (its start and the runs), and the time stamp where the report
    starts. Empty when the lines are not there."""
    stamps: list[tuple[float, str]] = []
    for line in stderr.splitlines():
        found = PROGRESS_LINE.match(line.strip())
        if found:
            stamps.append((float(found.group(1)), found.group(2)))

    def first(prefix: str) -> float | None:
        return next((at for at, what in stamps if what.startswith(prefix)), None)

    read, fit, spice, report = (first(p) for p in ("reading", "fitting", "starting ngspice",
                                                   "writing the report"))
    if None in (read, fit, spice, report):
        return {}
    return {"measurement_s": fit - read, "fits_s": spice - fit, "ngspice_s": report - spice,
            "report_at_s": report}


def parts_once(fixture: Path, trace: Path, runs: int) -> dict:
    """The unavoidable parts and a breakdown, timed in a fresh process (see
    :func:`_parts_here`)."""
    out = subprocess.run(
        [sys.executable, "-m", "benchmarks.bench_compare", "--parts", str(fixture), str(trace),
         str(runs)],
        cwd=REPO, capture_output=True, text=True, check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def _parts_here(fixture_path: Path, trace_path: Path, runs: int) -> dict:
    """Child side of :func:`parts_once`.

    The unavoidable parts: one read of the file, then ``runs`` ngspice runs (as many
    as the comparison evaluated candidates), each a default candidate's circuit (built
    with the invented event's natural frequency as the hint, taken in turn) at the
    fixture's stated values over the fit window compare uses (the record after the
    event, at most 9 time constants), from a cold start of the ngspice child as in
    compare. Besides them, for the note of a missed row: the time to import what
    ``xcheck compare`` imports, event detection and alignment alone
    (:func:`xcheck.capture.align.align_trace` on the trace already read), and the
    ring-down estimate of the aligned samples, called as
    :func:`xcheck.ringdown.from_file.ringdown_from_file` calls it.
    """
    begin = time.perf_counter()
    import xcheck.commands.compare  # noqa: F401  (the import cost compare pays)
    import xcheck.report.markdown  # noqa: F401
    from xcheck.capture.align import align_trace
    from xcheck.capture.scope_csv import read_trace
    from xcheck.circuit.expand import build_circuit
    from xcheck.engines.ngspice import simulate_ngspice
    from xcheck.fitting.candidates import RingHint, build_candidates
    from xcheck.fixture.reader import load_fixture
    from xcheck.measured import WINDOW_TIME_CONSTANTS
    from xcheck.ringdown import estimate_ringdown
    import_s = time.perf_counter() - begin

    start = time.perf_counter()
    trace = read_trace(trace_path)
    read_s = time.perf_counter() - start
    samples = len(trace)
    start = time.perf_counter()
    aligned, alignment = align_trace(trace, expected_sign=1)
    align_s = time.perf_counter() - start
    start = time.perf_counter()
    estimate_ringdown(aligned.time, aligned.voltage, noise_sigma=alignment.noise_rms,
                      exclude=aligned.clipped, resolution=trace.resolution, source=trace.source)
    estimate_s = time.perf_counter() - start
    del trace, aligned
    fixture = load_fixture(fixture_path)
    candidates = build_candidates(fixture, RingHint(1.0 / math.sqrt(L_LOOP * C_LOOP)))
    stop = min(AFTER_EVENT, WINDOW_TIME_CONSTANTS * 2 * L_LOOP / R_LOOP)
    ngspice_s = []
    for index in range(runs):
        circuit = build_circuit(fixture, candidates[index % len(candidates)].parameters)
        start = time.perf_counter()
        simulate_ngspice(circuit, stop_time=stop)
        ngspice_s.append(time.perf_counter() - start)
    return {"read_s": read_s, "ngspice_s": ngspice_s, "samples": samples,
            "import_s": import_s, "align_s": align_s, "estimate_s": estimate_s}


def _evaluated_candidates(report: Path) -> int:
    """How many candidates the comparison fitted and evaluated (summary.json)."""
    summary = json.loads((report / "summary.json").read_text(encoding="utf-8"))
    return sum(1 for candidate in summary["candidates"] if not candidate.get("failed"))


def growth_exponent(sizes: list[int], seconds: list[float]) -> float:
    """Least-squares slope of log(seconds) against log(sizes)."""
    slope, _ = np.polyfit(np.log(sizes), np.log(seconds), 1)
    return float(slope)


def _label(samples: int) -> str:
    """``10000`` -> ``"1e4"`` (a row key)."""
    mantissa, exponent = f"{samples:.0e}".split("e")
    return f"{mantissa}e{int(exponent)}"


def _size_row(key: str, samples: int, size_mb: float, run: dict, parts: dict) -> Row:
    """The ratio row of one size, with the breakdown in its note."""
    floor = parts["read_s"] + sum(parts["ngspice_s"])
    ratio = run["wall_s"] / floor
    rest = run["wall_s"] - floor
    estimate_s = parts["estimate_s"]
    note = (
        f"wall {run['wall_s']:.2f} s, peak RSS {run['peak_rss_bytes'] / 1e6:.0f} MB "
        f"(largest process); unavoidable: read {parts['read_s']:.2f} s + "
        f"{len(parts['ngspice_s'])} ngspice runs {sum(parts['ngspice_s']):.2f} s (the first "
        f"with the child's start-up, {parts['ngspice_s'][0]:.2f} s); beyond them "
        f"{rest:.2f} s, of which imports {parts['import_s']:.2f} s, event detection and "
        f"alignment {parts['align_s']:.2f} s, ring-down estimate {estimate_s:.2f} s "
        "(these three timed in a second fresh process)"
    )
    staged = stages(run.get("stderr", ""))
    if staged:
        report_s = max(run["wall_s"] - parts["import_s"] - staged["report_at_s"], 0.0)
        note += (
            f"; stages of the run (its progress lines, 0.1 s steps): measurement read, "
            f"aligned and estimated {staged['measurement_s']:.1f} s, fits "
            f"{staged['fits_s']:.1f} s, ngspice start and runs {staged['ngspice_s']:.1f} s, "
            f"report and exit about {report_s:.1f} s (wall less imports less the report's "
            "time stamp)"
        )
    if ratio > RATIO_GOAL:
        causes = [
            ("the imports (numpy, scipy, matplotlib, pyarrow, PySpice and xcheck's own "
             "modules), a fixed cost", parts["import_s"]),
            ("the ring-down estimate", estimate_s),
            ("event detection and alignment", parts["align_s"]),
        ]
        if staged:
            causes += [
                ("the fits", staged["fits_s"]),
                ("the report's figures and files, a nearly fixed cost", report_s),
            ]
        else:
            causes.append((
                "the fits, the ngspice evaluation of the fitted values and the report "
                "(the rest)", max(rest - parts["import_s"] - estimate_s - parts["align_s"], 0.0)))
        causes.sort(key=lambda item: -item[1])
        note += "; likely reason: " + ", then ".join(
            f"{words} ({seconds:.2f} s)" for words, seconds in causes[:2])
        allowance = (RATIO_GOAL - 1.0) * floor
        fixed = parts["import_s"] + (report_s if staged else 0.0)
        if fixed > allowance:
            note += (
                f"; the fixed costs alone ({fixed:.2f} s of imports"
                + (" and report" if staged else "")
                + f") exceed the {allowance:.2f} s the goal leaves beyond the unavoidable "
                "parts at this size"
            )
    return Row(key, f"compare end to end, {samples:,} samples ({size_mb:.0f} MB CSV)",
               f"<= {RATIO_GOAL:g}x", "one read_trace of the file + one ngspice run per "
               "candidate evaluated", f"{ratio:.2f}x", judged(ratio <= RATIO_GOAL), note)


def rows(sizes: list[int], workdir: Path, key: str = "e") -> list[Row]:
    """Rows of the end-to-end benchmark.

    Parameters
    ----------
    sizes
        Record lengths (samples), smallest first.
    workdir
        Where the fixture, the captures and the reports go.
    key
        Prefix of the rows' keys.

    Returns
    -------
    list of Row
        Per size (key ``e-1e4`` ...): the ratio of the wall time to the unavoidable
        parts (wall time, peak memory and the breakdown in the note); then the peak
        memory of the largest size (``e-memory``, info) and the growth exponent over
        all sizes (``e-growth``).
    """
    fixture = workdir / "bench_fixture.toml"
    fixture.write_text(FIXTURE, encoding="utf-8")
    walls: list[float] = []
    out: list[Row] = []
    peak = None
    for samples in sizes:
        trace = workdir / f"compare_{samples}.csv"
        if not trace.exists():
            write_trace(trace, samples)
        report = workdir / f"report_{samples}"
        run = compare_once(fixture, trace, report)
        row_key = f"{key}-{_label(samples)}"
        if run["status"] != 0:
            out.append(Row(row_key, f"compare end to end, {samples:,} samples",
                           f"<= {RATIO_GOAL:g}x", "exit status 0", "", MISSED,
                           f"xcheck compare exited with status {run['status']}; likely reason: "
                           + " ".join(run["stderr"].split())[-400:]))
            continue
        parts = parts_once(fixture, trace, _evaluated_candidates(report))
        walls.append(run["wall_s"])
        peak = (samples, run["peak_rss_bytes"], trace.stat().st_size)
        out.append(_size_row(row_key, samples, trace.stat().st_size / 1e6, run, parts))
    if peak is None:
        out.append(Row(f"{key}-memory", "compare peak memory", "reported", "CSV file size", "",
                       NOT_MEASURED, "every size failed (see their rows)"))
    else:
        samples, rss, size = peak
        out.append(Row(
            f"{key}-memory", f"compare peak RSS at {samples:,} samples", "reported (no goal)",
            "the samples as float64 (time and one channel)",
            f"{rss / (16 * samples):.2f}x", INFO,
            f"{rss / 1e6:.0f} MB peak RSS of the largest process; the samples as float64 are "
            f"{16 * samples / 1e6:.0f} MB, the CSV {size / 1e6:.0f} MB",
        ))
    if len(walls) >= 2 and len(walls) == len(sizes):
        slope = growth_exponent(sizes, walls)
        local = growth_exponent(sizes[-2:], walls[-2:])
        out.append(Row(
            f"{key}-growth", "compare wall time growth exponent "
                             f"({', '.join(_label(s) for s in sizes)} samples)",
            f"<= {EXPONENT_GOAL:g}", "log-log least-squares slope in n", f"{slope:.2f}",
            judged(slope <= EXPONENT_GOAL),
            "walls " + ", ".join(f"{w:.2f} s" for w in walls)
            + f"; slope between the two largest sizes {local:.2f} (the small sizes are "
              "dominated by fixed costs, so the overall slope understates the large-n growth)"
            + ("" if slope <= EXPONENT_GOAL else
               "; likely reason: a step of the measured side that grows faster than the read"),
        ))
    else:
        out.append(Row(f"{key}-growth", "compare wall time growth exponent", f"<= {EXPONENT_GOAL:g}",
                       "log-log least-squares slope in n", "", NOT_MEASURED,
                       "a size failed (see its row), so no slope" if len(sizes) >= 2
                       else "one size only, so no slope"))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    parser.add_argument("--keep", type=Path, default=None,
                        help="write the files here and keep them (reused when already there)")
    parser.add_argument("--parts", nargs=3, metavar=("FIXTURE", "TRACE", "RUNS"),
                        help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.parts:
        print(json.dumps(_parts_here(Path(args.parts[0]), Path(args.parts[1]),
                                     int(args.parts[2]))))
        return
    with tempfile.TemporaryDirectory() as tmp:
        folder = args.keep or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        for row in rows(sorted(args.sizes), folder):
            print(row.line())


if __name__ == "__main__":
    main()
