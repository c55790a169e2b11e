"""A batch: every fixture in a folder compared with its own measurement, in parallel.

**Pairing rule.** Every ``*.toml`` file in the folder or below it (hidden files and
folders left out) is a fixture. Its measurement is the file beside it with the same
name and another ending: ``NAME.csv`` or ``NAME.csv.gz`` is a scope trace,
``NAME.peaks.csv`` a table of extrema. Exactly one of them must be there; a fixture
with none, or with more than one, becomes an error row of the index (the others go on).

Each fixture is compared (:func:`xcheck.compare.run_comparison`) and its report
rendered (:func:`xcheck.report.markdown.write_report`) inside a worker of
:func:`xcheck.sweep.executors.open_executor`; the worker sends back the report's files
and headline numbers as a :class:`~xcheck.report.batch_index.BatchEntry`, so on a
Dask cluster the workers need to read the fixtures and measurements (the folder at the
same absolute path on every machine, e.g. a shared file system) but never write to
the caller's disk. A fixture that fails (a malformed file, an unreadable capture, a
crashed worker) is an entry carrying the error. :func:`write_batch` then writes the
batch folder (:func:`xcheck.report.batch_index.write_batch_folder`).
"""

from __future__ import annotations

import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from xcheck.errors import XcheckError
from xcheck.measured import display_path
from xcheck.report.batch_index import BatchEntry, write_batch_folder

if TYPE_CHECKING:
    from xcheck.outcome import Comparison

#: The value plotted and tabulated by default: the fitted extra series loss.
DEFAULT_VALUE = "loop.extra_resistance"

#: Endings of a fixture's measurement: (ending, kind).
MEASUREMENT_ENDINGS = ((".csv", "trace"), (".csv.gz", "trace"), (".peaks.csv", "peaks"))


@dataclass(frozen=True)
class BatchJob:
    """One fixture to compare, with its measurement (absolute paths).

    Attributes
    ----------
    name
        Path below the batch folder without ``.toml`` (POSIX form).
    fixture
        The fixture file.
    measurement
        Its trace or peak table, or None when the pairing rule found none or several.
    kind
        ``"trace"`` or ``"peaks"`` (``""`` without a measurement).
    problem
        Why the pairing failed, or "".
    use_ngspice
        Evaluate each fitted candidate in ngspice too.
    value_label
        The fitted value to report for the best candidate.
    """

    name: str
    fixture: str
    measurement: str | None
    kind: str
    problem: str = ""
    use_ngspice: bool = True
    value_label: str = DEFAULT_VALUE


def _hidden(path: Path, root: Path) -> bool:
    return any(part.startswith(".") for part in path.relative_to(root).parts)


def find_jobs(folder: str | Path, *, use_ngspice: bool = True,
              value_label: str = DEFAULT_VALUE) -> list[BatchJob]:
    """Every fixture below ``folder`` paired with its measurement (the pairing rule of the
    module docstring), in sorted path order.

    Parameters
    ----------
    folder
        The batch folder.
    use_ngspice, value_label
        Copied into each job.

    Returns
    -------
    list of BatchJob
        A job whose pairing failed carries its ``problem``.

    Raises
    ------
    XcheckError
        ``folder`` is missing, is not a folder, or holds no ``*.toml`` file.
    """
    root = Path(folder)
    if not root.exists():
        raise XcheckError(f"{folder}: no such folder; give xcheck batch the folder that holds "
                          "the fixture files (*.toml) and their captures")
    if not root.is_dir():
        raise XcheckError(f"{folder}: is not a folder; give xcheck batch a folder of fixture "
                          "files (*.toml) with their captures (for one fixture use xcheck compare)")
    root = root.resolve()
    fixtures = sorted((p for p in root.rglob("*.toml") if p.is_file() and not _hidden(p, root)),
                      key=lambda p: p.relative_to(root).as_posix())
    if not fixtures:
        raise XcheckError(
            f"{folder}: holds no fixture file (*.toml) in it or below it; put each fixture "
            "beside its capture, NAME.toml with NAME.csv, NAME.csv.gz or NAME.peaks.csv")
    jobs = []
    for path in fixtures:
        base = path.with_suffix("")
        found = [(Path(f"{base}{ending}"), kind) for ending, kind in MEASUREMENT_ENDINGS
                 if Path(f"{base}{ending}").is_file()]
        name = base.relative_to(root).as_posix()
        problem = ""
        if not found:
            problem = (f"{path}: no measurement beside this fixture; save its capture as "
                       f"{base.name}.csv or {base.name}.csv.gz (a scope trace) or "
                       f"{base.name}.peaks.csv (a table of extrema) in the same folder")
        elif len(found) > 1:
            problem = (f"{path}: more than one measurement beside this fixture "
                       f"({', '.join(p.name for p, _ in found)}); keep one, or move the others "
                       "away, so that it is clear which one to compare")
        measurement, kind = found[0] if len(found) == 1 else (None, "")
        jobs.append(BatchJob(name, str(path), str(measurement) if measurement else None, kind,
                             problem, use_ngspice, value_label))
    return jobs


def _report_files(comparison: Comparison) -> dict[str, bytes]:
    """The files of ``comparison``'s report (path inside the folder -> bytes)."""
    from xcheck.report.markdown import write_report

    with tempfile.TemporaryDirectory(prefix="xcheck-batch-") as tmp:
        folder = write_report(comparison, Path(tmp) / "report")
        return {p.relative_to(folder).as_posix(): p.read_bytes()
                for p in sorted(folder.rglob("*")) if p.is_file()}


def compare_job(job: BatchJob) -> BatchEntry:
    """Compare one fixture and render its report (runs in a worker).

    Parameters
    ----------
    job
        From :func:`find_jobs`.

    Returns
    -------
    BatchEntry
        Headline numbers and the report's files.

    Raises
    ------
    XcheckError
        The pairing failed, or the fixture or its measurement cannot be used (the
        executor turns it into a :class:`~xcheck.sweep.executors.TaskError`).
    """
    from xcheck.compare import run_comparison
    from xcheck.fixture.reader import load_fixture

    if job.problem:
        raise XcheckError(job.problem)
    fixture = load_fixture(job.fixture)
    comparison = run_comparison(
        fixture, trace=job.measurement if job.kind == "trace" else None,
        peaks=job.measurement if job.kind == "peaks" else None, use_ngspice=job.use_ngspice)
    best = comparison.best
    value = stderr = float("nan")
    unit = note = ""
    if best is None:
        note = "every candidate failed"
    else:
        fitted = next((v for v in best.fit.fitted if v.label == job.value_label), None)
        if fitted is None:
            note = f"the best candidate holds {job.value_label} fixed"
        else:
            value, stderr, unit = float(fitted.value), float(fitted.stderr), fitted.unit
    nrmse = best.theory.nrmse if best is not None and best.theory is not None else float("inf")
    return BatchEntry(
        name=job.name, fixture=display_path(job.fixture),
        measurement=display_path(job.measurement) if job.measurement else "",
        title=fixture.title, best=best.name if best is not None else None, nrmse=float(nrmse),
        value=value, stderr=stderr, unit=unit, value_note=note, verdict=comparison.verdict,
        files=_report_files(comparison))


def _error_entry(job: BatchJob, error: object) -> BatchEntry:
    message = " ".join(str(error).split()) or "failed without a message"
    return BatchEntry(name=job.name, fixture=display_path(job.fixture),
                      measurement=display_path(job.measurement) if job.measurement else "",
                      error=message)


def run_batch(folder: str | Path, *, workers: int | None = None, cluster: str | None = None,
              use_ngspice: bool = True, value_label: str = DEFAULT_VALUE,
              progress: Callable[[int, int], None] | None = None) -> list[BatchEntry]:
    """Compare every fixture below ``folder`` with its measurement, in parallel.

    Parameters
    ----------
    folder
        The batch folder (pairing rule in the module docstring).
    workers, cluster
        As for :func:`xcheck.sweep.executors.open_executor`.
    use_ngspice
        Evaluate each fitted candidate in ngspice too.
    value_label
        The fitted value to report per fixture.
    progress
        ``progress(done, total)``, called as fixtures finish.

    Returns
    -------
    list of BatchEntry
        One per fixture in sorted path order; an error entry where one failed.

    Raises
    ------
    XcheckError
        A bad folder (:func:`find_jobs`) or an executor that cannot be opened.
    """
    from xcheck.sweep.executors import TaskError, open_executor

    jobs = find_jobs(folder, use_ngspice=use_ngspice, value_label=value_label)
    with open_executor(workers, cluster) as executor:
        results = executor.map(compare_job, jobs, progress)
    return [_error_entry(job, result) if isinstance(result, TaskError) else result
            for job, result in zip(jobs, results)]


def write_batch(entries: list[BatchEntry], out: str | Path, *, folder: str | Path,
                value_label: str = DEFAULT_VALUE, max_nrmse: float | None = None) -> Path:
    """Write the batch folder: each report under ``reports/``, index.md, values.png and
    batch.json (:func:`xcheck.report.batch_index.write_batch_folder`).

    Parameters
    ----------
    entries
        From :func:`run_batch`.
    out
        The batch folder to write.
    folder
        The batch's input folder (for the index's heading).
    value_label, max_nrmse
        The value tabulated and plotted; the pass threshold on NRMSE, or None.

    Returns
    -------
    Path
        ``out``.
    """
    return write_batch_folder(out, entries, folder=display_path(folder),
                              value_label=value_label, max_nrmse=max_nrmse)
