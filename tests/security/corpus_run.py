"""Running one corpus case through ``xcheck.cli.main`` and judging what happened.

The case's input is written into ``<folder>/in/``, the command writes into
``<folder>/out/``, and the working directory is ``<folder>`` while it runs, so a default
output path would land there and be seen. A case is judged on:

- **crash**: an exception escaped ``main`` (any but SystemExit), or "Traceback" was
  printed;
- **clear error**: exit status 2 with exactly one paragraph on stderr that starts
  ``xcheck: `` and names the input file (and holds the case's ``words``);
- **injection**: a deck was written (exit 0) that fails the deck checks of
  tests/security/deck_checks.py;
- **input modified**: the input's bytes changed, or a file appeared outside ``out/``.

An output case (``Case.output``) sets up what stands at ``compare --out`` first
(:func:`make_output`); its message must name that path, and a run that succeeds must
leave no temporary sibling of the report folder.

Cases run in-process with stdout and stderr captured (fast), under an alarm so that a
read that blocks fails the case instead of hanging; a case that needs a real process
(a memory limit) runs in a child Python with an address-space limit (``resource``,
POSIX, from memory), and fails when its peak resident memory passes
:data:`CHILD_PEAK_BYTES`.
"""

from __future__ import annotations

import contextlib
import io
import os
import signal
import subprocess
import sys
import textwrap
import warnings
from dataclasses import dataclass, field
from pathlib import Path

from security.corpus_case import Case
from security.deck_checks import deck_problems

#: A refusal takes well under a second; a read that blocks would never end.
TIMEOUT_S = 60
#: Address-space limit of a child process (bytes): numpy, scipy and pyarrow loaded take
#: a few hundred MB; reading a gzip bomb's gigabytes into memory would exceed it.
CHILD_MEMORY_BYTES = 3 * 2**30

#: A valid fixture beside a trace for ``compare`` (the corpus's loop base).
FIXTURE_NAME = "jig.toml"


class Blocked(BaseException):
    """Raised by the alarm: a BaseException, so no ``except Exception`` in xcheck hides it."""


@dataclass
class Outcome:
    """What one case did.

    Attributes
    ----------
    code
        Exit status, or None when an exception escaped ``main``.
    stdout, stderr
        What was printed.
    crashed, clear, injected, modified
        The verdicts (see the module notes).
    problems
        What was wrong, in words, for an assertion message.
    """

    code: int | None
    stdout: str
    stderr: str
    crashed: bool = False
    clear: bool = False
    injected: bool = False
    modified: bool = False
    problems: list[str] = field(default_factory=list)

    @property
    def accepted(self) -> bool:
        """Exit 0 or 1 without a crash, an injection or a modified input."""
        return self.code in (0, 1) and not (self.crashed or self.injected or self.modified)


def make_input(case: Case, folder: Path) -> Path:
    """Create the case's input in ``folder`` and return its path."""
    path = folder / case.file_name
    if case.special is None:
        path.write_bytes(case.data)
    elif case.special == "folder":
        path.mkdir()
    elif case.special == "fifo":
        os.mkfifo(path)
    elif case.special == "dev_zero":
        return Path("/dev/zero")
    elif case.special == "link_to_dev_zero":
        path.symlink_to("/dev/zero")
    # "missing": the path is not created
    return path


#: The report folder a ``compare`` case writes, inside ``out/``.
REPORT = "report"


def make_output(case: Case, folder: Path) -> tuple[Path, list[str]]:
    """Set up what stands at ``compare --out`` for ``case``; (the path, extra options)."""
    out = folder / "out"
    report = out / REPORT
    if case.output in ("file", "under_file"):
        blocker = out / "taken"
        blocker.write_text("a file of the user's\n", encoding="utf-8")
        return (blocker if case.output == "file" else blocker / REPORT), []
    if case.output in ("foreign_folder", "foreign_folder_forced"):
        report.mkdir()
        (report / "notes.txt").write_text("the user's notes\n", encoding="utf-8")
        return report, ["--force"] if case.output == "foreign_folder_forced" else []
    if case.output == "holds_input_forced":
        return folder / "in", ["--force"]
    if case.output == "strays":  # as a run killed while writing leaves them
        (out / f".{REPORT}.0badc0de.tmp").mkdir()
        (out / f".{REPORT}.0badc0de.tmp" / "report.md").write_text("half", encoding="utf-8")
        (out / f".{REPORT}.00c0ffee.tmp").write_text("half a file", encoding="utf-8")
    return report, []


def arguments(case: Case, source: Path, folder: Path) -> list[str]:
    """The command line of ``case`` reading ``source`` and writing into ``folder/out``."""
    out = folder / "out"
    if case.command == "deck":
        return ["deck", str(source), "--out", str(out / "deck.cir")]
    if case.command == "ringdown":
        return ["ringdown", str(source), "--out", str(out / "r.png"),
                "--json", str(out / "r.json")]
    if case.command == "peaks":
        return ["ringdown", str(source), "--peaks", "--out", str(out / "r.png")]
    if case.command == "sweep":
        return ["compare", str(folder / "in" / FIXTURE_NAME), "--sweep", str(source),
                "--out", str(out / "report"), "--no-ngspice", "--quiet"]
    report, extra = make_output(case, folder)
    return ["compare", str(folder / "in" / FIXTURE_NAME), "--trace", str(source),
            "--out", str(report), "--no-ngspice", "--quiet", *extra]


def _snapshot(folder: Path) -> dict[str, bytes | None]:
    """Every path under ``folder`` (``out/`` excluded) with a regular file's bytes."""
    seen: dict[str, bytes | None] = {}
    for path in sorted(folder.rglob("*")):
        relative = path.relative_to(folder).as_posix()
        if relative == "out" or relative.startswith("out/"):
            continue
        regular = path.is_file() and not path.is_symlink()  # never opens a FIFO
        seen[relative] = path.read_bytes() if regular else None
    return seen


def _call_in_process(argv: list[str]) -> tuple[int | None, str, str, str | None]:
    """``main(argv)`` with its output and warnings captured, under an alarm; (code, out,
    err, escaped)."""
    from xcheck.cli import main

    out, err = io.StringIO(), io.StringIO()

    def on_alarm(signum, frame):
        raise Blocked(f"still running after {TIMEOUT_S} s")

    previous = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(TIMEOUT_S)
    escaped = None
    code: int | None = None
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err), \
                warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            code = main(argv)
    except Blocked as exc:
        escaped = str(exc)
    except Exception as exc:  # the crash being looked for
        escaped = f"{type(exc).__name__}: {exc}"[:300]
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)
    # A warning would reach the user's terminal beside the message (pytest makes it an
    # error): it is printed here as Python prints it, so the paragraph check sees it.
    shown = [w for w in caught if not w.filename.replace("\\", "/").count("/PySpice/")]
    text = err.getvalue() + "".join(
        warnings.formatwarning(w.message, w.category, w.filename, w.lineno) for w in shown)
    return code, out.getvalue(), text, escaped


#: Most memory (peak resident set) a child run may take: a few hundred MB for the
#: libraries, far less than the gigabytes a gzip bomb's content would need.
CHILD_PEAK_BYTES = 2**30
_PEAK_MARK = "\n[peak resident set, KiB] "

_CHILD = textwrap.dedent("""\
    import resource, sys
    resource.setrlimit(resource.RLIMIT_AS, ({limit}, {limit}))
    from xcheck.cli import main
    code = main(sys.argv[1:])
    sys.stdout.write({mark!r} + str(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss))
    sys.exit(code)
    """)


def _call_in_child(argv: list[str], cwd: Path) -> tuple[int | None, str, str, str | None]:
    """``main(argv)`` in a child Python with an address-space limit and a timeout."""
    code = _CHILD.format(limit=CHILD_MEMORY_BYTES, mark=_PEAK_MARK)
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    try:
        done = subprocess.run([sys.executable, "-c", code, *argv], cwd=cwd, env=env,
                              capture_output=True, text=True, timeout=TIMEOUT_S)
    except subprocess.TimeoutExpired:
        return None, "", "", f"still running after {TIMEOUT_S} s"
    escaped = None if done.returncode >= 0 else f"killed by signal {-done.returncode}"
    stdout, _, peak = done.stdout.partition(_PEAK_MARK)
    # ru_maxrss is in KiB on Linux (getrusage(2), from memory).
    if escaped is None and (not peak.strip().isdigit()
                            or int(peak) * 1024 > CHILD_PEAK_BYTES):
        escaped = f"peak memory {peak.strip() or '?'} KiB, more than {CHILD_PEAK_BYTES} bytes"
    return (done.returncode if done.returncode >= 0 else None, stdout, done.stderr,
            escaped)


def one_paragraph_problems(stderr: str, name: str, words: tuple[str, ...]) -> list[str]:
    """Why ``stderr`` is not one clear paragraph naming ``name`` and ``words``."""
    problems = []
    if not stderr.startswith("xcheck: "):
        problems.append("stderr does not start with 'xcheck: '")
    if "\n\n" in stderr.strip() or not stderr.endswith("\n"):
        problems.append("stderr is not one paragraph ending in a newline")
    flat = " ".join(stderr.split())
    for word in (name, *words):
        if word not in flat:
            problems.append(f"the message does not hold {word!r}")
    return problems


def run_case(case: Case, folder: Path, fixture_text: str) -> Outcome:
    """Run ``case`` in the empty folder ``folder``; return its :class:`Outcome`.

    Parameters
    ----------
    case
        The case.
    folder
        An empty folder the run may use (its ``in/`` and ``out/`` are made here).
    fixture_text
        A valid fixture, written beside a trace for ``compare``.
    """
    inputs = folder / "in"
    inputs.mkdir()
    (folder / "out").mkdir()
    if case.command == "compare":
        (inputs / FIXTURE_NAME).write_text(fixture_text, encoding="utf-8")
    if case.command == "sweep":  # what the sweep measured: C1 on its own
        (inputs / FIXTURE_NAME).write_text(
            fixture_text + '\n[swept]\nmeasures = "impedance"\npart = "C1"\n',
            encoding="utf-8")
    source = make_input(case, inputs)
    argv = arguments(case, source, folder)
    before = _snapshot(folder)
    previous_cwd = os.getcwd()
    os.chdir(folder)
    try:
        if case.process:
            code, stdout, stderr, escaped = _call_in_child(argv, folder)
        else:
            code, stdout, stderr, escaped = _call_in_process(argv)
    finally:
        os.chdir(previous_cwd)
    outcome = Outcome(code, stdout, stderr)
    if escaped is not None or "Traceback" in stdout + stderr:
        outcome.crashed = True
        outcome.problems.append(escaped or "a traceback was printed")
    if _snapshot(folder) != before:
        outcome.modified = True
        outcome.problems.append("the input changed or a file appeared outside out/")
    if code != case.expect:
        outcome.problems.append(f"exit status {code}, expected {case.expect}")
    named = Path(argv[argv.index("--out") + 1]).name if case.output else source.name
    if code == 2:
        paragraph = one_paragraph_problems(stderr, named, case.words)
        outcome.clear = not paragraph and not outcome.crashed
        outcome.problems += paragraph
    if code in (0, 1) and stderr.strip():
        outcome.problems.append(f"a run that succeeded printed on stderr: {stderr[:200]!r}")
    if case.command == "compare" and code == 0 and any(
            p.name.startswith(f".{REPORT}.") for p in (folder / "out").iterdir()):
        outcome.problems.append("a temporary sibling of the report folder remained")
    if case.command == "deck" and code == 0:
        found = deck_problems(folder / "out" / "deck.cir", source, case.data)
        outcome.injected = bool(found)
        outcome.problems += found
    return outcome
