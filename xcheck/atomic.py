"""Writing output files so that a failure never leaves a half-written file behind."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable

from xcheck.errors import XcheckError


def _umask() -> int:
    current = os.umask(0o022)
    os.umask(current)
    return current


def write_atomically(path: Path, writer: Callable[[Path], None]) -> None:
    """Run ``writer`` on a temporary file next to ``path``, then rename it into place.

    Parameters
    ----------
    path
        The file to create or replace.
    writer
        Called with the temporary file's path; writes the whole content.

    Raises
    ------
    XcheckError
        When the folder cannot be written; the temporary file is removed.
    """
    temporary: Path | None = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        handle, name = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
        os.close(handle)
        temporary = Path(name)
        writer(temporary)
        os.chmod(temporary, 0o666 & ~_umask())  # mkstemp makes 0600; use the usual mode
        os.replace(temporary, path)
        temporary = None
    except OSError as exc:
        raise XcheckError(
            f"{path}: cannot write ({exc.strerror or exc}); check that the folder is "
            "writable, or choose another with --out"
        ) from exc
    finally:
        if temporary is not None and temporary.exists():
            temporary.unlink()
