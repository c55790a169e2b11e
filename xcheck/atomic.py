"""Writing output files so that a failure never leaves a half-written file behind."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Callable

from xcheck import __version__
from xcheck.errors import XcheckError

#: Written into every PNG xcheck makes, so a later run can tell its own files.
PNG_METADATA = {"Software": f"xcheck {__version__}"}


def png_is_ours(path: Path) -> bool:
    """True when ``path`` is a PNG whose Software text chunk names xcheck."""
    from PIL import Image  # matplotlib depends on Pillow

    try:
        with Image.open(path) as image:
            return str(image.info.get("Software", "")).startswith("xcheck")
    except (OSError, ValueError):
        return False


def refuse_foreign(path: Path, is_ours: Callable[[Path], bool], option: str = "--out") -> None:
    """Raise when ``path`` exists and is not an earlier xcheck output; nothing is written.

    Parameters
    ----------
    path
        The file about to be written.
    is_ours
        Recognises a file an earlier xcheck run wrote.
    option
        The command-line option that chose ``path``, for the message.
    """
    if path.exists() and not (path.is_file() and is_ours(path)):
        raise XcheckError(
            f"{path}: exists and was not written by xcheck; nothing was written. Choose "
            f"another {option} or move the file away."
        )


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
