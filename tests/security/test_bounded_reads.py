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
import subprocess
import sys

import pytest

from compare_cases import LOSSY_JIG_TOML, write_trace
from xcheck.capture import csvlayout
from xcheck.cli import main
from xcheck.fixture.reader import FIXTURE_MAX_BYTES

pytestmark = pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs POSIX FIFOs")

#: A blocked read would wait forever; a refusal takes well under a second plus start-up.
TIMEOUT_S = 60


def run_cli(*args: str, cwd) -> subprocess.CompletedProcess[str]:
    """xcheck in a child process, so a regression that blocks fails by timeout, not hangs."""
    return subprocess.run([sys.executable, "-m", "xcheck", *args], cwd=cwd, capture_output=True,
                          text=True, timeout=TIMEOUT_S, check=False)


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
def test_fixture_that_is_not_a_regular_file_is_refused_fast(tmp_path, kind, words):
    if kind == "zero" and not os.path.exists("/dev/zero"):
        pytest.skip("no /dev/zero")
    path = special_path(tmp_path, kind)
    result = run_cli("deck", path, "--out", str(tmp_path / "x.cir"), cwd=tmp_path)
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
def test_trace_that_is_not_a_regular_file_is_refused_fast(tmp_path, kind, words):
    if kind == "zero" and not os.path.exists("/dev/zero"):
        pytest.skip("no /dev/zero")
    path = special_path(tmp_path, kind)
    result = run_cli("ringdown", path, "--out", str(tmp_path / "r.png"), cwd=tmp_path)
    assert result.returncode == 2
    err = one_paragraph(result.stderr)
    assert path in err, err
    # A folder keeps its earlier, shorter wording ("this is a directory").
    assert (words in err and "not a regular file" in err) or "directory" in err, err
    assert not (tmp_path / "r.png").exists()


def test_peak_table_fifo_is_refused_fast(tmp_path):
    fixture = tmp_path / "jig.toml"
    fixture.write_text(LOSSY_JIG_TOML, encoding="utf-8")
    pipe = special_path(tmp_path, "fifo")
    result = run_cli("compare", str(fixture), "--peaks", pipe, "--out", str(tmp_path / "o"),
                     "--no-ngspice", "--quiet", cwd=tmp_path)
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
