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
  written (:func:`refuse_foreign`, :func:`refuse_foreign_folder`). ``--force`` lifts
  that rule for the one path it names (:func:`replacing_anyway`); the write is still a
  temporary sibling swapped in whole.

Temporary siblings are named ``.<name>.<8 hex digits>.tmp`` (a file or folder being
written) and ``.<name>.<8 hex digits>.old`` (the folder being replaced). While a run
uses one it holds an exclusive ``flock`` on it, which the kernel drops when the process
ends however it ends; the next write of the same path removes every such sibling no
process holds (:func:`remove_stray_temporaries`), so a run killed half-way leaves
nothing behind for long. Where ``fcntl`` is missing (Windows) nothing is removed.
:func:`check_output_folder` makes a command's checks of its ``--out`` folder before any
work starts: a file there, a parent that cannot be written, a folder that holds an input.
"""

from __future__ import annotations

import contextlib
import json
import os
import re
import secrets
import shutil
from collections.abc import Callable, Iterable, Iterator
from contextvars import ContextVar
from pathlib import Path

try:
    import fcntl
except ImportError:  # Windows: strays are kept, never removed
    fcntl = None  # type: ignore[assignment]

from xcheck import __version__
from xcheck.engines.deck import GENERATED_MARK, is_xcheck_deck
from xcheck.errors import XcheckError
from xcheck.interrupts import sigint_held, stop_if_interrupted

#: PNG text chunks of every figure xcheck writes: the Software chunk lets a later run
#: tell its own files; no creation time, so a figure is byte-identical run to run.
PNG_METADATA: dict[str, str | None] = {"Software": f"xcheck {__version__}", "Creation Time": None}

#: Why a file that fails :func:`deck_is_ours` is refused (for :func:`refuse_foreign`).
DECK_HINT = f"its second line does not read '{GENERATED_MARK}'"

#: Why a folder that fails :func:`report_folder_is_ours` is refused.
REPORT_HINT = "it is not an earlier xcheck report: no xcheck summary.json in it"

_HEAD_CHARS = 4096
_ATTEMPTS = 100

#: Paths whose refusal ``--force`` lifted (:func:`replacing_anyway`), as absolute text.
_REPLACE_ANYWAY: ContextVar[frozenset[str]] = ContextVar("xcheck_replace_anyway",
                                                         default=frozenset())

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
        f"it was and nothing was written; choose another {option}, move it away first, or "
        f"give --force to replace it"
    )


def _key(path: Path) -> str:
    return os.path.normcase(os.path.abspath(path))


def _forced(path: Path) -> bool:
    return _key(path) in _REPLACE_ANYWAY.get()


@contextlib.contextmanager
def replacing_anyway(path: Path, force: bool = True) -> Iterator[None]:
    """Within the block, ``path`` is replaced even when no "is ours" test accepts it.

    This is ``--force``: every refusal of this module skips its "is ours" test for
    ``path`` (and only for it), so a report module's own write, which names no option,
    replaces the foreign file or folder the user chose to overwrite. A file where a folder
    goes (or the reverse) is still refused, and the write is still atomic.

    Parameters
    ----------
    path
        The output the user gave ``--force`` for.
    force
        False makes the block change nothing (so a command can write
        ``with replacing_anyway(out, args.force):``).
    """
    if not force:
        yield
        return
    token = _REPLACE_ANYWAY.set(_REPLACE_ANYWAY.get() | {_key(path)})
    try:
        yield
    finally:
        _REPLACE_ANYWAY.reset(token)


def refuse_foreign(
    path: Path, is_ours: Callable[[Path], bool], option: str = "--out", *, hint: str = "",
    force: bool = False,
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
    force
        Accept an existing file ``is_ours`` does not recognise (``--force``; also when
        ``path`` is inside :func:`replacing_anyway`).

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
    if path.exists() and not (force or _forced(path)) and not is_ours(path):
        raise _foreign(path, "file", option, hint)


def require_folder(path: Path, option: str = "--out") -> None:
    """Raise when ``path`` exists and is not a folder (a file where a folder must go)."""
    if path.exists() and not path.is_dir():
        raise XcheckError(
            f"{path}: exists and is not a folder; nothing was written. Give {option} a "
            "folder name"
        )


def refuse_foreign_folder(
    path: Path, is_ours: Callable[[Path], bool], option: str = "--out", *, hint: str = "",
    force: bool = False,
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
    force
        Accept a folder ``is_ours`` does not recognise (``--force``; also when ``path``
        is inside :func:`replacing_anyway`).

    Raises
    ------
    XcheckError
        When ``path`` is a file, or a non-empty folder ``is_ours`` does not recognise.
    """
    require_folder(path, option)
    if force or _forced(path):
        return
    if path.is_dir() and any(path.iterdir()) and not is_ours(path):
        raise _foreign(path, "folder", option, hint)


def _nearest_existing(path: Path) -> Path:
    """``path`` or the closest folder above it that exists (absolute)."""
    current = Path(os.path.abspath(path))
    while not os.path.lexists(current) and current != current.parent:
        current = current.parent
    return current


def _contains(folder: Path, other: Path) -> bool:
    """True when ``other`` is ``folder`` or lies inside it (symbolic links resolved)."""
    try:
        Path(other).resolve().relative_to(Path(folder).resolve())
    except ValueError:
        return False
    return True


def require_writable(path: Path, option: str = "--out") -> None:
    """Raise unless ``path`` can be made or replaced: the nearest folder that exists
    above it is a folder this user may write to.

    Parameters
    ----------
    path
        The file or folder about to be written (missing folders above it are made).
    option
        The command-line option that chose ``path``, for the message.

    Raises
    ------
    XcheckError
        When a path above ``path`` is a file, or the nearest existing folder above it is
        read-only for this user (``os.access``; a read-only file system counts too).
    """
    path = Path(path)
    above = _nearest_existing(path.parent)
    if not above.is_dir():
        raise XcheckError(
            f"{path}: {above} is a file, so nothing can be made below it; nothing was "
            f"written. Give {option} a path whose parents are folders"
        )
    if not os.access(above, os.W_OK | os.X_OK):
        raise XcheckError(
            f"{path}: the folder {above} cannot be written by this user (read-only), so "
            f"nothing can be made there; nothing was written. Choose another {option} in a "
            "folder you can write to, or change that folder's permissions"
        )


def check_output_folder(
    path: Path,
    is_ours: Callable[[Path], bool],
    option: str = "--out",
    *,
    hint: str = "",
    force: bool = False,
    inputs: Iterable[Path | str | None] = (),
) -> None:
    """A command's checks of its output folder, made before any work starts.

    Parameters
    ----------
    path
        The folder the command will write (replacing it whole).
    is_ours
        Recognises a folder an earlier xcheck run wrote.
    option, hint
        For the messages: the option that chose ``path``; what ``is_ours`` looks for.
    force
        ``--force``: replace a folder ``is_ours`` does not recognise.
    inputs
        The run's input files and folders (None entries are skipped): a folder that holds
        one is never replaced, since replacing it would delete the input.

    Raises
    ------
    XcheckError
        When ``path`` is a file; a path above it is a file; the nearest folder that exists
        above it cannot be written by this user; it holds an input, the current folder or
        the home folder; or it is a foreign folder and ``force`` is false. One paragraph
        each, nothing written.
    """
    path = Path(path)
    require_folder(path, option)
    require_writable(path, option)
    if os.path.lexists(path):
        for name, other in _kept(inputs):
            if _contains(path, other):
                raise XcheckError(
                    f"{path}: this folder holds {name}, and writing the report replaces "
                    "the whole folder, which would delete it; nothing was written. Choose "
                    f"another {option}, e.g. a new folder beside it"
                )
    refuse_foreign_folder(path, is_ours, option, hint=hint, force=force)


def _kept(inputs: Iterable[Path | str | None]) -> Iterator[tuple[str, Path]]:
    """What an output folder must never hold: the inputs, the current and home folders
    (a file system's root holds the current folder)."""
    for item in inputs:
        if item is not None:
            yield f"the input {item}", Path(item)
    yield "the current folder", Path.cwd()
    try:
        yield "your home folder", Path.home()
    except (RuntimeError, KeyError):  # no HOME and no password entry
        return


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


def _stray_pattern(name: str) -> re.Pattern[str]:
    return re.compile(r"\." + re.escape(name) + r"\.[0-9a-f]{8}\.(tmp|old)")


def _hold(path: Path) -> int | None:
    """Open ``path`` (never through a symbolic link) and take an exclusive ``flock`` on
    it without waiting; the descriptor, or None when another process holds it, it cannot
    be opened, or locks are not available."""
    if fcntl is None:
        return None
    try:
        descriptor = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
    except OSError:
        return None
    try:
        fcntl.flock(descriptor, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(descriptor)
        return None
    return descriptor


def _release(descriptor: int | None) -> None:
    if descriptor is not None:
        os.close(descriptor)  # closing drops the flock


def remove_stray_temporaries(path: Path) -> list[Path]:
    """Remove the temporary siblings of ``path`` that an interrupted run left behind.

    A sibling named as this module names its temporaries (``.<name>.<hex>.tmp`` or
    ``.old``) is removed when no process holds its lock, i.e. the run that made it has
    ended. When ``path`` itself is missing and a ``.old`` folder is there (the run stopped
    between moving the old folder aside and moving the new one in), the first such
    folder is put back at ``path`` instead of being removed.

    Parameters
    ----------
    path
        The file or folder about to be written.

    Returns
    -------
    list of Path
        The siblings removed or put back.
    """
    path = Path(path)
    pattern = _stray_pattern(path.name)
    try:
        entries = sorted(os.scandir(path.parent), key=lambda entry: entry.name)
    except OSError:
        return []
    handled = []
    for entry in entries:
        match = pattern.fullmatch(entry.name)
        if match is None or entry.is_symlink():
            continue
        stray = Path(entry.path)
        descriptor = _hold(stray)
        if descriptor is None:
            continue  # in use by a run still going (or not ours to judge)
        try:
            if match.group(1) == "old" and entry.is_dir() and not os.path.lexists(path):
                os.replace(stray, path)
            elif entry.is_dir(follow_symlinks=False):
                shutil.rmtree(stray, ignore_errors=True)
            else:
                stray.unlink(missing_ok=True)
        except OSError:
            continue
        finally:
            _release(descriptor)
        handled.append(stray)
    return handled


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
    lock: int | None = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        remove_stray_temporaries(path)
        temporary = _sibling(path, ".tmp", _new_file)
        lock = _hold(temporary)
        writer(temporary)
        _fsync(temporary)
        os.replace(temporary, path)
        temporary = None
    except OSError as exc:
        raise _cannot_write(path, option, exc) from exc
    finally:
        _release(lock)
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
    staging: Path | None = None
    lock: int | None = None
    try:
        try:
            folder.parent.mkdir(parents=True, exist_ok=True)
            remove_stray_temporaries(folder)
            # The strays' check ran before an old folder was put back: check again.
            refuse_foreign_folder(folder, is_ours, option, hint=hint)
            staging = _sibling(folder, ".tmp", _new_folder)
        except OSError as exc:
            raise _cannot_write(folder, option, exc) from exc
        # From here on, an interrupt (Ctrl-C) anywhere removes the staging folder.
        lock = _hold(staging)
        writer(staging)
        stop_if_interrupted()  # a Ctrl-C a library did not pass on still stops the swap
        _swap_in(staging, folder)
    except OSError as exc:
        _remove_staging(staging)
        raise _cannot_write(folder, option, exc) from exc
    except BaseException:
        _remove_staging(staging)
        raise
    finally:
        _release(lock)
    return folder


def _remove_staging(staging: Path | None) -> None:
    """Remove a staging folder, with Ctrl-C held off until it is gone (a second
    interrupt would otherwise leave half of it behind)."""
    if staging is None:
        return
    with sigint_held():
        shutil.rmtree(staging, ignore_errors=True)


def _swap_in(staging: Path, folder: Path) -> None:
    """Rename ``staging`` to ``folder``; an existing ``folder`` is moved aside first and
    removed after, or put back when the second rename fails. The folder moved aside is
    locked (it becomes the ``.old`` sibling), so no other run takes it for a stray."""
    if not folder.exists():
        os.replace(staging, folder)
        return
    old = _sibling(folder, ".old", _new_folder)
    lock = _hold(folder)
    try:
        os.replace(folder, old)  # onto the empty folder just made: atomic on POSIX
        try:
            os.replace(staging, folder)
        except BaseException:
            os.replace(old, folder)
            raise
        shutil.rmtree(old, ignore_errors=True)
    finally:
        _release(lock)
