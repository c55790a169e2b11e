"""Every file xcheck writes: atomically, with ordinary permissions, never over foreign files.

Three rules, one module:

- **Atomic.** A file is written to a temporary file in the same folder and renamed into
  place (:func:`write_file_atomically`); a folder is filled in a temporary sibling folder
  and swapped in (:func:`write_folder_atomically`). A failure leaves the old content, or
  nothing, never half a file.
- **Ordinary permissions.** Temporary files and folders are created with mode ``0o666``
  and ``0o777``, which the operating system reduces by the process umask (and a folder's
  default ACL) exactly as for a file made with :func:`open` or a folder made with
  :func:`os.mkdir`. The umask is never read or changed, so there is no window in which
  another thread sees a different one. (:mod:`tempfile` would make them 0600 and 0700:
  a colleague could not read the report.)
- **Never over a foreign file.** A path that exists is replaced only when an "is ours"
  test (:func:`png_is_ours`, :func:`deck_is_ours`, :func:`csv_is_ours`,
  :func:`json_is_ours`, :func:`report_folder_is_ours`) says an earlier xcheck run wrote
  it; otherwise one error names the path and the option that chose it, and nothing is
  written (:func:`refuse_foreign`, :func:`refuse_foreign_folder`).
"""

from __future__ import annotations

import json
import os
import secrets
import shutil
from collections.abc import Callable, Iterable
from pathlib import Path

from xcheck import __version__
from xcheck.engines.deck import GENERATED_MARK, is_xcheck_deck
from xcheck.errors import XcheckError

#: PNG text chunks of every figure xcheck writes: the Software chunk lets a later run
#: tell its own files; no creation time, so a figure is byte-identical run to run.
PNG_METADATA: dict[str, str | None] = {"Software": f"xcheck {__version__}", "Creation Time": None}

#: Why a file that fails :func:`deck_is_ours` is refused (for :func:`refuse_foreign`).
DECK_HINT = f"its second line does not read '{GENERATED_MARK}'"

#: Why a folder that fails :func:`report_folder_is_ours` is refused.
REPORT_HINT = "it is not an earlier xcheck report: no xcheck summary.json in it"

_HEAD_CHARS = 4096
_ATTEMPTS = 100

# --------------------------------------------------------------------------------------
# "Is ours" tests
# --------------------------------------------------------------------------------------


def png_is_ours(path: Path) -> bool:
    """True when ``path`` is a PNG whose Software text chunk names xcheck."""
    from PIL import Image  # matplotlib depends on Pillow

    try:
        with Image.open(path) as image:
            return str(image.info.get("Software", "")).startswith("xcheck")
    except (OSError, ValueError):
        return False


def _head(path: Path) -> str | None:
    """The first characters of a text file, or None when it cannot be read."""
    try:
        with open(path, encoding="utf-8", errors="replace") as handle:
            return handle.read(_HEAD_CHARS)
    except OSError:
        return None


def deck_is_ours(path: Path) -> bool:
    """True when ``path`` is a SPICE deck xcheck wrote (its header line says so)."""
    head = _head(path)
    return head is not None and is_xcheck_deck(head)


def csv_is_ours(path: Path, header_start: str) -> bool:
    """True when the first line of ``path`` starts with ``header_start``, the header of
    a CSV file xcheck writes."""
    head = _head(path)
    return head is not None and head.startswith(header_start)


def json_is_ours(path: Path, *, schema: str | None = None, keys: Iterable[str] = ()) -> bool:
    """True when ``path`` holds a JSON object that xcheck wrote.

    Parameters
    ----------
    path
        The file to test.
    schema
        When given, the object's ``"schema"`` key must equal it.
    keys
        Keys the object must hold.
    """
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    if not isinstance(data, dict):
        return False
    if schema is not None and data.get("schema") != schema:
        return False
    return all(key in data for key in keys)


def report_folder_is_ours(folder: Path, schema: str) -> bool:
    """True when ``folder`` holds a ``summary.json`` whose ``"schema"`` is ``schema``."""
    return json_is_ours(folder / "summary.json", schema=schema)


# --------------------------------------------------------------------------------------
# Refusals
# --------------------------------------------------------------------------------------


def _foreign(path: Path, kind: str, option: str, hint: str) -> XcheckError:
    why = f" ({hint})" if hint else ""
    return XcheckError(
        f"{path}: this {kind} exists and was not written by xcheck{why}, so it was left as "
        f"it was and nothing was written; choose another {option}, or move it away first"
    )


def refuse_foreign(
    path: Path, is_ours: Callable[[Path], bool], option: str = "--out", *, hint: str = ""
) -> None:
    """Raise unless ``path`` is free to write: missing, or a file an earlier run wrote.

    Parameters
    ----------
    path
        The file about to be written.
    is_ours
        Recognises a file an earlier xcheck run wrote.
    option
        The command-line option that chose ``path``, for the message.
    hint
        What ``is_ours`` looks for, shown in the message (optional).

    Raises
    ------
    XcheckError
        When ``path`` is a folder, or a file ``is_ours`` does not recognise.
    """
    if path.is_dir():
        raise XcheckError(
            f"{path}: is a folder; nothing was written. Give {option} a file name, not a "
            "folder"
        )
    if path.exists() and not is_ours(path):
        raise _foreign(path, "file", option, hint)


def require_folder(path: Path, option: str = "--out") -> None:
    """Raise when ``path`` exists and is not a folder (a file where a folder must go)."""
    if path.exists() and not path.is_dir():
        raise XcheckError(
            f"{path}: exists and is not a folder; nothing was written. Give {option} a "
            "folder name"
        )


def refuse_foreign_folder(
    path: Path, is_ours: Callable[[Path], bool], option: str = "--out", *, hint: str = ""
) -> None:
    """Raise unless ``path`` is free to replace: missing, empty, or an earlier output.

    Parameters
    ----------
    path
        The folder about to be written.
    is_ours
        Recognises a folder an earlier xcheck run wrote.
    option
        The command-line option that chose ``path``, for the message.
    hint
        What ``is_ours`` looks for, shown in the message (optional).

    Raises
    ------
    XcheckError
        When ``path`` is a file, or a non-empty folder ``is_ours`` does not recognise.
    """
    require_folder(path, option)
    if path.is_dir() and any(path.iterdir()) and not is_ours(path):
        raise _foreign(path, "folder", option, hint)


# --------------------------------------------------------------------------------------
# Writes
# --------------------------------------------------------------------------------------


def _cannot_write(path: Path, option: str, exc: OSError) -> XcheckError:
    return XcheckError(
        f"{path}: cannot write ({exc.strerror or exc}); check that the folder exists and is "
        f"writable, or choose another {option}"
    )


def _sibling(path: Path, tag: str, create: Callable[[Path], None]) -> Path:
    """A new, unused sibling of ``path`` named ``.<name>.<random><tag>``, made by ``create``."""
    for _ in range(_ATTEMPTS):
        candidate = path.with_name(f".{path.name}.{secrets.token_hex(4)}{tag}")
        try:
            create(candidate)
        except FileExistsError:
            continue
        return candidate
    raise FileExistsError(f"no free temporary name next to {path}")


def _new_file(path: Path) -> None:
    # Mode 0o666: the operating system applies the umask, as open() does.
    os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666))


def _new_folder(path: Path) -> None:
    os.mkdir(path, 0o777)  # the operating system applies the umask, as os.mkdir does


def _fsync(path: Path) -> None:
    with open(path, "rb+") as handle:
        os.fsync(handle.fileno())


def write_file_atomically(
    path: Path,
    writer: Callable[[Path], None],
    *,
    is_ours: Callable[[Path], bool] | None = None,
    option: str = "--out",
    hint: str = "",
) -> None:
    """Run ``writer`` on a temporary file next to ``path``, then rename it into place.

    Parameters
    ----------
    path
        The file to create or replace; missing folders above it are created.
    writer
        Called with the temporary file's path (which exists, empty); writes the whole
        content. Give matplotlib an explicit ``format``: the name ends in ``.tmp``.
    is_ours
        When given, an existing ``path`` is replaced only if this accepts it
        (:func:`refuse_foreign`).
    option, hint
        For the messages: the option that chose ``path``; what ``is_ours`` looks for.

    Raises
    ------
    XcheckError
        When ``path`` is refused or cannot be written; the temporary file is removed and
        ``path`` is as it was.
    """
    path = Path(path)
    if is_ours is not None:
        refuse_foreign(path, is_ours, option, hint=hint)
    temporary: Path | None = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        temporary = _sibling(path, ".tmp", _new_file)
        writer(temporary)
        _fsync(temporary)
        os.replace(temporary, path)
        temporary = None
    except OSError as exc:
        raise _cannot_write(path, option, exc) from exc
    finally:
        if temporary is not None:
            temporary.unlink(missing_ok=True)


def write_text_atomically(path: Path, text: str, **options) -> None:
    """Write ``text`` (UTF-8, ``\\n`` line ends) to ``path`` with
    :func:`write_file_atomically`; ``options`` are passed on to it."""

    def writer(temporary: Path) -> None:
        with open(temporary, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)

    write_file_atomically(path, writer, **options)


def write_folder_atomically(
    folder: Path,
    writer: Callable[[Path], None],
    *,
    is_ours: Callable[[Path], bool],
    option: str = "--out",
    hint: str = "",
) -> Path:
    """Fill a temporary sibling folder with ``writer``, then swap it in for ``folder``.

    Parameters
    ----------
    folder
        The folder to create or replace; missing folders above it are created.
    writer
        Called with the staging folder's path; writes every file into it.
    is_ours
        An existing, non-empty ``folder`` is replaced only if this accepts it
        (:func:`refuse_foreign_folder`).
    option, hint
        For the messages: the option that chose ``folder``; what ``is_ours`` looks for.

    Returns
    -------
    Path
        ``folder``.

    Raises
    ------
    XcheckError
        When ``folder`` is refused or cannot be written; nothing is touched then, and the
        staging folder is removed. Any exception from ``writer`` is passed on after the
        staging folder is removed.
    """
    folder = Path(folder)
    refuse_foreign_folder(folder, is_ours, option, hint=hint)
    try:
        folder.parent.mkdir(parents=True, exist_ok=True)
        staging = _sibling(folder, ".tmp", _new_folder)
    except OSError as exc:
        raise _cannot_write(folder, option, exc) from exc
    try:
        writer(staging)
        _swap_in(staging, folder)
    except OSError as exc:
        shutil.rmtree(staging, ignore_errors=True)
        raise _cannot_write(folder, option, exc) from exc
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return folder


def _swap_in(staging: Path, folder: Path) -> None:
    """Rename ``staging`` to ``folder``; an existing ``folder`` is moved aside first and
    removed after, or put back when the second rename fails."""
    if not folder.exists():
        os.replace(staging, folder)
        return
    old = _sibling(folder, ".old", _new_folder)
    os.replace(folder, old)  # onto the empty folder just made: atomic on POSIX
    try:
        os.replace(staging, folder)
    except BaseException:
        os.replace(old, folder)
        raise
    shutil.rmtree(old, ignore_errors=True)
