"""``xcheck doctor``: what is installed, the ngspice library loaded, and what to fix.

References: the library file and version are checked against what the system and
ngspice themselves say: the file the dynamic loader finds for ``libngspice`` (ctypes,
the Python standard library, loading it in a separate process and reading that
process's memory map; /proc/PID/maps is Linux's, from memory) and the version ngspice
reports to the engine's own worker (``version -f``). Library versions are compared with
``importlib.metadata`` (the installed distributions' own records).
"""

from __future__ import annotations

import ctypes.util
import os
import re
import subprocess
import sys
from importlib import metadata
from pathlib import Path

import pytest

from xcheck import cli

#: The doctor's line for the library: "<version> loaded from <path> (...)".
LIBRARY_LINE = re.compile(r"ok\s+ngspice library\s+(ngspice-\S+) loaded from (\S+) \(")

#: A child that loads the library with ctypes, not PySpice, and prints the files mapped.
_CTYPES_LOAD = (
    "import ctypes, os, sys\n"
    "ctypes.CDLL(sys.argv[1])\n"
    "print('\\n'.join(line.split(None, 5)[5].strip() for line in open('/proc/self/maps')\n"
    "                 if len(line.split(None, 5)) == 6))\n"
)


def _env(**changes: str) -> dict[str, str]:
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    env.update(changes)
    return env


def _doctor(env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    """``python -m xcheck doctor`` in a child with ``env``."""
    return subprocess.run([sys.executable, "-m", "xcheck", "doctor"], capture_output=True,
                          text=True, env=env, timeout=300, stdin=subprocess.DEVNULL)


@pytest.mark.ngspice
def test_a_real_run_names_the_library_file_and_the_version_ngspice_reports(printed):
    from xcheck.engines.ngspice import ngspice_version

    assert cli.main(["doctor"]) == 0
    shown = printed()
    assert "Traceback" not in shown.raw_out + shown.raw_err
    match = LIBRARY_LINE.search(shown.raw_out)
    assert match is not None, shown.raw_out
    version, path = match.groups()
    # The version is the one ngspice reports to the engine's worker.
    assert version == ngspice_version()
    # The file is a real file, and it is the one the dynamic loader maps for the name
    # PySpice asks for (ctypes in a separate process; /proc maps, Linux, from memory).
    assert Path(path).is_file()
    asked = os.environ.get("NGSPICE_LIBRARY_PATH") or "libngspice.so"
    mapped = subprocess.run([sys.executable, "-c", _CTYPES_LOAD, asked], capture_output=True,
                            text=True, timeout=120, check=True).stdout.splitlines()
    assert any(os.path.samefile(path, other) for other in mapped if os.path.isfile(other))
    soname = ctypes.util.find_library("ngspice")  # the loader's cache (ldconfig) name
    if soname is not None:
        assert Path(path).name.startswith(soname), (path, soname)
    # Python and xcheck themselves, and every library with its installed version.
    assert sys.executable in shown.out
    assert f"{metadata.version('numpy')}" in shown.out
    for name in ("numpy", "scipy", "matplotlib", "pyarrow", "networkx", "PySpice", "dask",
                 "distributed", "rich", "scikit-rf"):
        line = next(line for line in shown.raw_out.splitlines() if f" {name} " in line)
        assert metadata.version(name) in line, line


@pytest.mark.parametrize("kind", ["nonexistent", "not a library"])
def test_a_missing_library_exits_2_with_the_install_hint_and_no_traceback(
        tmp_path, monkeypatch, printed, kind):
    fake = tmp_path / "libngspice.so"
    if kind == "not a library":
        fake.write_text("this text file is not a shared library\n", encoding="utf-8")
    # PySpice 1.5 reads NGSPICE_LIBRARY_PATH when it is imported (Shared.py,
    # NgSpiceShared.setup_platform); the doctor's child process imports it afresh.
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(fake))
    assert cli.main(["doctor"]) == 2
    shown = printed()
    assert "Traceback" not in shown.raw_out + shown.raw_err
    assert shown.raw_err.startswith("xcheck: ") and "\n\n" not in shown.raw_err.strip()
    assert re.search(r"missing\s+ngspice library", shown.raw_out)
    assert str(fake) in shown.err
    assert "apt-get install libngspice0-dev" in shown.err
    assert "NGSPICE_LIBRARY_PATH" in shown.err


def _shadow(folder: Path, module: str) -> Path:
    """A package named ``module`` that fails to import, to put first on the path: a broken
    install of an installed distribution (its metadata is still there)."""
    package = folder / module
    package.mkdir(parents=True)
    (package / "__init__.py").write_text(
        'raise ImportError("simulated broken install")\n', encoding="utf-8")
    return folder


@pytest.mark.ngspice  # with the library missing the exit status would be 2 for that
def test_a_broken_optional_extra_is_only_noted(tmp_path):
    done = _doctor(_env(PYTHONPATH=str(_shadow(tmp_path, "skrf"))))
    assert done.returncode == 0, done.stdout + done.stderr
    assert "Traceback" not in done.stdout + done.stderr
    line = next(line for line in done.stdout.splitlines() if " scikit-rf " in line)
    assert line.startswith("optional") and "simulated broken install" in line
    assert "pip install --force-reinstall 'scikit-rf>=1.0'" in done.stdout


def test_a_broken_required_library_exits_2_and_says_what_to_reinstall(tmp_path):
    done = _doctor(_env(PYTHONPATH=str(_shadow(tmp_path, "rich"))))
    assert done.returncode == 2
    assert "Traceback" not in done.stdout + done.stderr
    assert re.search(r"missing\s+rich\s", done.stdout)
    flat = " ".join(done.stderr.split())
    assert flat.startswith("xcheck: ") and "rich" in flat
    assert "pip install --force-reinstall 'rich>=13'" in flat


def test_doctor_help_imports_no_numerical_library():
    code = ("import sys\nfrom xcheck.cli import main\nmain(['doctor', '--help'])\n"
            "print(' '.join(sorted(m.split('.')[0] for m in sys.modules)))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    loaded = set(done.stdout.split())
    assert "xcheck" in loaded
    assert not loaded & {"numpy", "scipy", "matplotlib", "pyarrow", "PySpice", "networkx"}
