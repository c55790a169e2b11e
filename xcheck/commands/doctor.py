"""``xcheck doctor``: what is installed, what is missing, and what to install or set.

It prints Python's version and executable, xcheck's version, the version of every library
xcheck needs (and of the optional ones), and which ngspice shared library PySpice loads:
its file, and the version ngspice itself reports. The library is loaded in a child
Python (``python -c``) exactly as the ngspice engine's worker loads it
(:func:`xcheck.engines.ngspice._load_ngspice`, which honours PySpice's
``NGSPICE_LIBRARY_PATH``), so a library that crashes on loading cannot take this command
down; the file is read from the child's memory map (``/proc/self/maps``, Linux), else
from the name PySpice asked the dynamic loader for.

Exit status: 0 when everything required is there (a missing optional extra is only
noted); 2 when something required is missing, with one paragraph naming each missing
piece and what to install or set.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
from dataclasses import dataclass
from importlib import metadata

from xcheck import __version__
from xcheck.errors import XcheckError

#: Seconds the child may take to start Python, import PySpice and load the library
#: (the engine's own start-up allowance, ``xcheck.engines.ngspice.START_TIMEOUT``).
PROBE_TIMEOUT_S = 120.0

#: Marks the child's one line of JSON among anything the library prints on stdout.
_PROBE_MARK = "xcheck-doctor-probe:"

#: Oldest Python xcheck runs on (pyproject.toml's requires-python).
MIN_PYTHON = (3, 11)


@dataclass(frozen=True)
class Component:
    """One Python distribution xcheck uses.

    Attributes
    ----------
    distribution
        Its name on the package index (as pip knows it).
    module
        The module to import to check that it works.
    required
        False for an optional extra.
    purpose
        What xcheck needs it for, in words.
    spec
        The requirement pip is given (pyproject.toml's).
    extra
        The xcheck extra that brings it, for an optional one.
    """

    distribution: str
    module: str
    required: bool
    purpose: str
    spec: str
    extra: str | None = None

    @property
    def install(self) -> str:
        """What to run when it is missing."""
        if self.extra is not None:
            return f"pip install 'xcheck[{self.extra}]' (or pip install '{self.spec}')"
        return f"pip install '{self.spec}'"


#: Every distribution xcheck imports, in the order printed.
COMPONENTS: tuple[Component, ...] = (
    Component("numpy", "numpy", True, "arrays", "numpy>=1.26"),
    Component("scipy", "scipy", True, "fits and filters", "scipy>=1.11"),
    Component("matplotlib", "matplotlib", True, "figures", "matplotlib>=3.8"),
    Component("pyarrow", "pyarrow", True, "reading scope CSV files", "pyarrow>=15"),
    Component("networkx", "networkx", True, "circuit topology checks", "networkx>=3.2"),
    Component("PySpice", "PySpice", True, "the bridge to ngspice", "PySpice==1.5"),
    Component("dask", "dask", True, "batch and sweep on a cluster", "dask[distributed]>=2024.1"),
    Component("distributed", "distributed", True, "batch and sweep on a cluster",
              "dask[distributed]>=2024.1"),
    Component("rich", "rich", True, "progress bars", "rich>=13"),
    Component("scikit-rf", "skrf", False, "reading Touchstone .s1p/.s2p sweeps",
              "scikit-rf>=1.0", extra="touchstone"),
)

#: What the child runs: load the library as the engine's worker does, then report.
_PROBE_CODE = f"""
import json, os, sys
found = {{}}
try:
    from PySpice.Spice.NgSpice.Shared import NgSpiceShared
    try:  # PySpice formats its name with the instance's number ("" for the first)
        found["asked"] = str(NgSpiceShared.LIBRARY_PATH).format("")
    except (IndexError, KeyError, ValueError):
        found["asked"] = str(NgSpiceShared.LIBRARY_PATH)
    from xcheck.engines.ngspice import _load_ngspice, _version_of
    shared = _load_ngspice()
    found["version"] = _version_of(shared)
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as maps:
            paths = [line.split(None, 5)[5].strip() for line in maps
                     if len(line.split(None, 5)) == 6]
        found["paths"] = list(dict.fromkeys(
            p for p in paths if "ngspice" in os.path.basename(p).lower()))
    except OSError:
        found["paths"] = []
except BaseException as exc:
    found["error"] = " ".join(str(exc).split()) or type(exc).__name__
sys.stdout.write("\\n{_PROBE_MARK}" + json.dumps(found) + "\\n")
sys.stdout.flush()
os._exit(0)
"""


@dataclass(frozen=True)
class Line:
    """One row of the report: a component, its state and the details."""

    state: str  # "ok", "missing" or "optional"
    name: str
    detail: str
    fix: str = ""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """``doctor`` takes no arguments."""
    del parser


def _python_line() -> Line:
    version = ".".join(str(part) for part in sys.version_info[:3])
    detail = f"{version} ({sys.executable})"
    if sys.version_info[:2] < MIN_PYTHON:
        need = ".".join(str(part) for part in MIN_PYTHON)
        return Line("missing", "Python", detail, f"use Python {need} or newer")
    return Line("ok", "Python", detail)


def _component_line(component: Component) -> Line:
    """Installed (by its metadata) and importable, or what to do."""
    import importlib

    state_missing = "missing" if component.required else "optional"
    try:
        version = metadata.version(component.distribution)
    except metadata.PackageNotFoundError:
        detail = "not installed" + ("" if component.required else f" ({component.purpose})")
        return Line(state_missing, component.distribution, detail, component.install)
    try:
        importlib.import_module(component.module)
    except Exception as exc:  # noqa: BLE001 - any failure to import is the finding
        reason = " ".join(str(exc).split())[:200] or type(exc).__name__
        return Line(state_missing, component.distribution,
                    f"{version} is installed but cannot be imported ({reason})",
                    f"pip install --force-reinstall '{component.spec}'")
    return Line("ok", component.distribution, version)


def probe_ngspice() -> dict[str, object]:
    """Load ngspice's shared library in a child Python and report what it loaded.

    Returns
    -------
    dict
        ``asked`` (the name or path PySpice gave the dynamic loader), ``version`` (what
        ngspice reports, ``"ngspice-39.3"``) and ``paths`` (the library files mapped into
        the child), or ``error`` (why loading failed).
    """
    env = dict(os.environ, OPENBLAS_NUM_THREADS=os.environ.get("OPENBLAS_NUM_THREADS", "1"))
    try:
        done = subprocess.run([sys.executable, "-c", _PROBE_CODE], capture_output=True,
                              text=True, errors="replace", timeout=PROBE_TIMEOUT_S, env=env,
                              stdin=subprocess.DEVNULL)
    except subprocess.TimeoutExpired:
        return {"error": f"loading it did not finish within {PROBE_TIMEOUT_S:g} s"}
    except OSError as exc:
        return {"error": f"the child Python could not start ({exc.strerror or exc})"}
    for line in reversed(done.stdout.splitlines()):
        if line.startswith(_PROBE_MARK):
            try:
                found = json.loads(line[len(_PROBE_MARK):])
            except ValueError:
                break
            if isinstance(found, dict):
                return found
    code = done.returncode
    how = f"killed by signal {-code}" if code < 0 else f"exit status {code}"
    return {"error": f"the child Python that loaded it stopped ({how}) before reporting"}


def _ngspice_line() -> Line:
    from xcheck.engines.ngspice import INSTALL_HELP

    found = probe_ngspice()
    setting = os.environ.get("NGSPICE_LIBRARY_PATH")
    asked = setting if setting is not None else found.get("asked", "libngspice.so")
    if "error" in found:
        source = ("NGSPICE_LIBRARY_PATH" if setting is not None
                  else "the dynamic loader's search path")
        # The engine's message is INSTALL_HELP then "(Loading failed with: ...)": keep
        # only the reason here, the help is the fix.
        reason = str(found["error"]).rpartition("(Loading failed with: ")[2].rstrip(")")
        return Line("missing", "ngspice library",
                    f"{asked!s} (from {source}) could not be loaded: {reason}",
                    f"{INSTALL_HELP}; until then, compare and demo run with --no-ngspice "
                    "(closed form only)")
    paths = [str(p) for p in found.get("paths", []) if p]  # type: ignore[union-attr]
    where = ", ".join(paths) if paths else f"{asked} (as the dynamic loader resolves it)"
    via = "NGSPICE_LIBRARY_PATH" if setting is not None else f"PySpice asked for {asked}"
    return Line("ok", "ngspice library", f"{found.get('version')} loaded from {where} ({via})")


def report_lines() -> list[Line]:
    """Every row of the report, Python first and ngspice's library last."""
    import xcheck

    home = os.path.dirname(os.path.abspath(xcheck.__file__))
    return [_python_line(), Line("ok", "xcheck", f"{__version__} ({home})"),
            *(_component_line(component) for component in COMPONENTS), _ngspice_line()]


def render(lines: list[Line]) -> str:
    """The rows as aligned text, each missing or optional one with what to do."""
    width = max(len(line.name) for line in lines)
    out = []
    for line in lines:
        out.append(f"{line.state:8} {line.name:{width}}  {line.detail}")
        if line.fix and line.state != "missing":
            out.append(f"{'':8} {'':{width}}  to add it: {line.fix}")
    return "\n".join(out) + "\n"


def run(args: argparse.Namespace) -> int:
    """Print what is installed; 0 when all that is required is there, else raise."""
    del args
    lines = report_lines()
    sys.stdout.write(render(lines))
    sys.stdout.flush()
    missing = [line for line in lines if line.state == "missing"]
    if missing:
        raise XcheckError(
            f"{len(missing)} required piece{'s are' if len(missing) != 1 else ' is'} "
            "missing: " + " ".join(
                f"({i}) {line.name}: {line.detail.rstrip('.')}. To fix: {line.fix}."
                for i, line in enumerate(missing, 1)))
    sys.stdout.write("everything xcheck needs is installed\n")
    return 0
