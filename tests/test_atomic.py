"""xcheck.atomic: atomic file and folder writes, ordinary permissions, foreign files kept.

References: the standard library. A file made by plain ``open(path, "w")`` and a folder
made by ``os.mkdir(path)`` get mode 0o666 / 0o777 reduced by the process umask (Python's
``os`` documentation, "mode ... masked out by the current umask"); xcheck's outputs must
get exactly the same modes. PNG text chunks are read back with Pillow, not with xcheck.
"""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

import matplotlib.image
import numpy as np
import pytest
from PIL import Image

from xcheck import __version__
from xcheck.atomic import (
    PNG_METADATA,
    csv_is_ours,
    deck_is_ours,
    json_is_ours,
    png_is_ours,
    refuse_foreign,
    refuse_foreign_folder,
    report_folder_is_ours,
    write_file_atomically,
    write_folder_atomically,
    write_text_atomically,
)
from xcheck.errors import XcheckError


@pytest.fixture(params=[0o022, 0o027, 0o002, 0o077])
def umask(request):
    """Run the test under each of several common umasks (restored afterwards)."""
    previous = os.umask(request.param)
    try:
        yield request.param
    finally:
        os.umask(previous)


def _mode(path: Path) -> int:
    return stat.S_IMODE(path.stat().st_mode)


def _siblings(path: Path) -> list[str]:
    """Names next to ``path`` that start like xcheck's temporary names."""
    return sorted(p.name for p in path.parent.iterdir() if p.name.startswith(f".{path.name}."))


# --------------------------------------------------------------------------------------
# One file
# --------------------------------------------------------------------------------------


def test_a_file_is_written_and_replaced_whole(tmp_path: Path) -> None:
    target = tmp_path / "sub" / "out.txt"  # the missing folder is created
    write_text_atomically(target, "first\n")
    write_text_atomically(target, "second\n")
    assert target.read_bytes() == b"second\n"
    assert _siblings(target) == []


@pytest.mark.parametrize("error", [OSError(28, "No space left on device"), ValueError("bug")])
def test_a_failing_writer_leaves_no_temporary_file_and_the_old_content(
    tmp_path: Path, error: Exception
) -> None:
    target = tmp_path / "out.txt"
    target.write_text("old\n", encoding="utf-8")

    def writer(temporary: Path) -> None:
        temporary.write_text("half", encoding="utf-8")
        raise error

    expected = XcheckError if isinstance(error, OSError) else ValueError
    with pytest.raises(expected) as caught:
        write_file_atomically(target, writer, option="--json")
    if expected is XcheckError:  # names the path, the reason and the option
        assert str(target) in str(caught.value) and "No space left" in str(caught.value)
        assert "--json" in str(caught.value)
    assert target.read_text(encoding="utf-8") == "old\n"
    assert _siblings(target) == []


def test_file_permissions_are_those_of_a_plain_open(tmp_path: Path, umask: int) -> None:
    reference = tmp_path / "plain.txt"
    with open(reference, "w", encoding="utf-8") as handle:  # the standard library's mode
        handle.write("x")
    ours = tmp_path / "ours.txt"
    write_text_atomically(ours, "x")
    assert _mode(ours) == _mode(reference) == 0o666 & ~umask
    write_text_atomically(ours, "y")  # a replacement too
    assert _mode(ours) == _mode(reference)


# --------------------------------------------------------------------------------------
# One folder
# --------------------------------------------------------------------------------------


def _fill(names: dict[str, str]):
    def writer(staging: Path) -> None:
        for name, text in names.items():
            (staging / name).write_text(text, encoding="utf-8")

    return writer


def _ours(folder: Path) -> bool:
    return (folder / "marker").is_file()


def test_a_folder_is_swapped_in_whole(tmp_path: Path) -> None:
    target = tmp_path / "reports" / "demo"
    write_folder_atomically(target, _fill({"marker": "1", "old.txt": "old"}), is_ours=_ours)
    write_folder_atomically(target, _fill({"marker": "2", "new.txt": "new"}), is_ours=_ours)
    assert sorted(p.name for p in target.iterdir()) == ["marker", "new.txt"]
    assert (target / "marker").read_text(encoding="utf-8") == "2"
    assert _siblings(target) == []  # neither the staging nor the old folder is left


def test_a_failing_folder_writer_leaves_the_old_folder(tmp_path: Path) -> None:
    target = tmp_path / "out"
    write_folder_atomically(target, _fill({"marker": "1"}), is_ours=_ours)

    def broken(staging: Path) -> None:
        (staging / "marker").write_text("2", encoding="utf-8")
        raise RuntimeError("figure failed")

    with pytest.raises(RuntimeError, match="figure failed"):
        write_folder_atomically(target, broken, is_ours=_ours)
    assert (target / "marker").read_text(encoding="utf-8") == "1"
    assert _siblings(target) == []


def test_folder_permissions_are_those_of_os_mkdir(tmp_path: Path, umask: int) -> None:
    reference = tmp_path / "plain"
    os.mkdir(reference)  # the standard library's mode
    (reference / "f.txt").write_text("x", encoding="utf-8")
    ours = tmp_path / "ours"
    write_folder_atomically(ours, _fill({"marker": "1", "f.txt": "x"}), is_ours=_ours)
    assert _mode(ours) == _mode(reference) == 0o777 & ~umask
    assert _mode(ours / "f.txt") == _mode(reference / "f.txt")
    write_folder_atomically(ours, _fill({"marker": "2"}), is_ours=_ours)  # replaced
    assert _mode(ours) == _mode(reference)


# --------------------------------------------------------------------------------------
# Refusals
# --------------------------------------------------------------------------------------


def test_a_foreign_file_is_refused_and_kept(tmp_path: Path) -> None:
    precious = tmp_path / "mine.json"
    precious.write_text('{"mine": 1}\n', encoding="utf-8")
    with pytest.raises(XcheckError) as caught:
        write_text_atomically(precious, "{}", is_ours=lambda p: False, option="--json",
                              hint="no xcheck keys in it")
    message = str(caught.value)
    assert message.startswith(f"{precious}: this file exists and was not written by xcheck")
    assert "no xcheck keys in it" in message and "nothing was written" in message
    assert "--json" in message
    assert precious.read_text(encoding="utf-8") == '{"mine": 1}\n'
    assert _siblings(precious) == []


def test_a_folder_where_a_file_goes_is_refused(tmp_path: Path) -> None:
    with pytest.raises(XcheckError, match=r"is a folder.*--out"):
        refuse_foreign(tmp_path, lambda p: True, "--out")


def test_a_foreign_folder_is_refused_and_kept(tmp_path: Path) -> None:
    precious = tmp_path / "precious"
    precious.mkdir()
    (precious / "notes.txt").write_text("keep me", encoding="utf-8")
    with pytest.raises(XcheckError) as caught:
        write_folder_atomically(precious, _fill({"marker": "1"}), is_ours=_ours,
                                option="--out folder")
    message = str(caught.value)
    assert message.startswith(f"{precious}: this folder exists and was not written by xcheck")
    assert "--out folder" in message
    assert sorted(p.name for p in precious.iterdir()) == ["notes.txt"]
    assert _siblings(precious) == []


def test_an_empty_folder_is_replaced_and_a_file_is_not(tmp_path: Path) -> None:
    empty = tmp_path / "empty"
    empty.mkdir()
    write_folder_atomically(empty, _fill({"marker": "1"}), is_ours=lambda p: False)
    assert (empty / "marker").is_file()
    a_file = tmp_path / "a_file"
    a_file.write_text("x", encoding="utf-8")
    with pytest.raises(XcheckError, match=r"exists and is not a folder.*--out"):
        refuse_foreign_folder(a_file, _ours, "--out")
    assert a_file.read_text(encoding="utf-8") == "x"


# --------------------------------------------------------------------------------------
# "Is ours" tests
# --------------------------------------------------------------------------------------


def test_png_is_ours_reads_the_software_chunk(tmp_path: Path) -> None:
    pixels = np.zeros((4, 4, 3))
    plain, ours = tmp_path / "plain.png", tmp_path / "ours.png"
    matplotlib.image.imsave(plain, pixels)  # matplotlib's own Software chunk
    matplotlib.image.imsave(ours, pixels, metadata=PNG_METADATA)
    with Image.open(ours) as image:  # Pillow, an independent PNG reader
        assert image.info["Software"] == f"xcheck {__version__}"
        assert "Creation Time" not in image.info
    assert png_is_ours(ours) and not png_is_ours(plain)
    text = tmp_path / "not.png"
    text.write_text("not a PNG", encoding="utf-8")
    assert not png_is_ours(text)


def test_text_and_json_is_ours(tmp_path: Path) -> None:
    deck, foreign = tmp_path / "a.cir", tmp_path / "b.cir"
    deck.write_text("* title\n* generated by xcheck 0.1.0: generated, do not edit\n.end\n",
                    encoding="utf-8")
    foreign.write_text("* my own deck\nR1 1 0 1\n", encoding="utf-8")
    assert deck_is_ours(deck) and not deck_is_ours(foreign)
    csv = tmp_path / "p.csv"
    csv.write_text("time_s,ngspice_probe_V\n0,1\n", encoding="utf-8")
    assert csv_is_ours(csv, "time_s,ngspice_probe_V") and not csv_is_ours(csv, "keep,me")
    summary = tmp_path / "summary.json"
    summary.write_text(json.dumps({"schema": "xcheck-summary", "best": None}), encoding="utf-8")
    assert json_is_ours(summary, schema="xcheck-summary", keys=["best"])
    assert not json_is_ours(summary, schema="other")
    assert not json_is_ours(summary, keys=["damped_frequency_hz"])
    assert report_folder_is_ours(tmp_path, "xcheck-summary")
    assert not report_folder_is_ours(tmp_path / "missing", "xcheck-summary")
    (tmp_path / "list.json").write_text("[1, 2]", encoding="utf-8")
    assert not json_is_ours(tmp_path / "list.json")
