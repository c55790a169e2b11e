"""Inputs are regular files of bounded size: a FIFO, a device, a folder or a huge file is
refused at once with one paragraph and exit status 2, and nothing is written.

File kinds as the operating system reports them (os.mkfifo, os.stat, /dev/zero as an
endless character device: POSIX, from memory). The limits are the documented constants
xcheck.fixture.reader.FIXTURE_MAX_BYTES (1 MiB) and
xcheck.capture.csvlayout.TRACE_MAX_BYTES (2 GiB); the trace tests lower the latter with
monkeypatch so an oversized file costs kilobytes, not gigabytes.
"""

from __future__ import annotations

import gzip
import os
import signal
from dataclasses import dataclass

import pytest

from compare_cases import LOSSY_JIG_TOML, write_trace
from xcheck.capture import csvlayout
from xcheck.cli import main
from xcheck.fixture.reader import FIXTURE_MAX_BYTES

pytestmark = pytest.mark.skipif(not hasattr(os, "mkfifo") or not hasattr(signal, "SIGALRM"),
                                reason="needs POSIX FIFOs and alarms")

#: A blocked read would wait forever; a refusal takes well under a second.
TIMEOUT_S = 60


class Blocked(BaseException):
    """Raised by the alarm: a BaseException, so no ``except OSError`` in xcheck hides it."""


@dataclass(frozen=True)
class Result:
    returncode: int
    stderr: str


def run_cli(printed, *args: str) -> Result:
    """xcheck's ``main`` under an alarm, so a regression that blocks (a FIFO opened for
    reading waits for a writer) fails after TIMEOUT_S instead of hanging the suite: the
    signal interrupts the blocking call and its handler raises (PEP 475, from memory)."""

    def on_alarm(signum, frame):
        raise Blocked(f"xcheck {args[0]} was still blocked after {TIMEOUT_S} s")

    previous = signal.signal(signal.SIGALRM, on_alarm)
    signal.alarm(TIMEOUT_S)
    try:
        code = main(list(args))
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)
    return Result(code, printed().raw_err)


def one_paragraph(err: str) -> str:
    assert "Traceback" not in err, err
    assert err.startswith("xcheck: ") and "\n\n" not in err.strip(), err
    return " ".join(err.split())


def special_path(tmp_path, kind: str) -> str:
    if kind == "fifo":
        path = tmp_path / "pipe.csv"
        os.mkfifo(path)
        return str(path)
    if kind == "folder":
        (tmp_path / "a_folder").mkdir()
        return str(tmp_path / "a_folder")
    return "/dev/zero"


KINDS = [("fifo", "FIFO (named pipe)"), ("folder", "folder"), ("zero", "character device")]


@pytest.mark.parametrize("kind, words", KINDS)
def test_fixture_that_is_not_a_regular_file_is_refused_fast(tmp_path, kind, words, printed):
    if kind == "zero" and not os.path.exists("/dev/zero"):
        pytest.skip("no /dev/zero")
    path = special_path(tmp_path, kind)
    result = run_cli(printed, "deck", path, "--out", str(tmp_path / "x.cir"))
    assert result.returncode == 2
    err = one_paragraph(result.stderr)
    assert path in err and words in err and "not a regular file" in err, err
    assert not (tmp_path / "x.cir").exists()


def test_fixture_over_the_limit_is_refused(tmp_path, printed):
    path = tmp_path / "huge.toml"
    # Valid TOML (a comment line) one byte past the limit.
    body = LOSSY_JIG_TOML.encode()
    path.write_bytes(body + b"#" * (FIXTURE_MAX_BYTES + 1 - len(body)))
    assert path.stat().st_size == FIXTURE_MAX_BYTES + 1
    out = tmp_path / "x.cir"
    assert main(["deck", str(path), "--out", str(out)]) == 2
    err = one_paragraph(printed().raw_err)
    assert "huge.toml" in err and "1 MiB" in err and "right file" in err, err
    assert not out.exists()


def test_fixture_at_the_limit_is_still_read(tmp_path):
    # Boundary: a file of exactly FIXTURE_MAX_BYTES is accepted (the limit is inclusive).
    text = LOSSY_JIG_TOML + "#" * (FIXTURE_MAX_BYTES - len(LOSSY_JIG_TOML.encode()) - 1) + "\n"
    path = tmp_path / "big_ok.toml"
    path.write_text(text, encoding="utf-8")
    assert path.stat().st_size == FIXTURE_MAX_BYTES
    assert main(["deck", str(path), "--out", str(tmp_path / "ok.cir")]) == 0


@pytest.mark.parametrize("kind, words", KINDS)
def test_trace_that_is_not_a_regular_file_is_refused_fast(tmp_path, kind, words, printed):
    if kind == "zero" and not os.path.exists("/dev/zero"):
        pytest.skip("no /dev/zero")
    path = special_path(tmp_path, kind)
    result = run_cli(printed, "ringdown", path, "--out", str(tmp_path / "r.png"))
    assert result.returncode == 2
    err = one_paragraph(result.stderr)
    assert path in err, err
    # A folder keeps its earlier, shorter wording ("this is a directory").
    assert (words in err and "not a regular file" in err) or "directory" in err, err
    assert not (tmp_path / "r.png").exists()


def test_peak_table_fifo_is_refused_fast(tmp_path, printed):
    fixture = tmp_path / "jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    pipe = special_path(tmp_path, "fifo")
    result = run_cli(printed, "compare", str(fixture), "--peaks", pipe, "--out",
                     str(tmp_path / "o"), "--no-ngspice", "--quiet")
    assert result.returncode == 2
    err = one_paragraph(result.stderr)
    assert pipe in err and "FIFO" in err, err
    assert not (tmp_path / "o").exists()


def test_plain_trace_over_the_limit_is_refused_before_reading(tmp_path, monkeypatch, printed):
    trace = write_trace(tmp_path, 31)
    monkeypatch.setattr(csvlayout, "TRACE_MAX_BYTES", trace.stat().st_size - 1)
    assert main(["ringdown", str(trace), "--out", str(tmp_path / "r.png")]) == 2
    err = one_paragraph(printed().raw_err)
    assert trace.name in err and "more than" in err and "right file" in err, err
    assert not (tmp_path / "r.png").exists()


def test_gzip_trace_is_bounded_by_its_decompressed_size(tmp_path, monkeypatch, printed):
    trace = write_trace(tmp_path, 32)
    text = trace.read_bytes()
    packed = tmp_path / "trace.csv.gz"
    packed.write_bytes(gzip.compress(text))
    # Under the limit the gzip trace reads like the plain one (reference: the same file
    # uncompressed, gzip from the standard library).
    assert main(["ringdown", str(packed), "--out", str(tmp_path / "ok.png")]) == 0
    printed()
    # The compressed file is far under the limit, the decompressed text is over it.
    monkeypatch.setattr(csvlayout, "TRACE_MAX_BYTES", len(text) // 2)
    assert packed.stat().st_size < len(text) // 2
    assert main(["ringdown", str(packed), "--out", str(tmp_path / "r.png")]) == 2
    err = one_paragraph(printed().raw_err)
    assert "trace.csv.gz" in err and "decompressed" in err, err
    assert not (tmp_path / "r.png").exists()
