"""The record of one hostile or malformed input of the corpus (tests/security/corpus.py).

A case is data: the bytes of one file (or a special kind of file: a folder, a FIFO,
``/dev/zero``), which command reads it, and the exit status expected. The runner
(tests/security/corpus_run.py) makes the file, calls ``xcheck.cli.main`` and judges what
happened; the invented inputs are built from the base fixtures and traces beside them.
"""

from __future__ import annotations

from dataclasses import dataclass

#: The commands a case runs: ``deck`` reads a fixture, ``ringdown`` a trace,
#: ``peaks`` a peak table (``ringdown --peaks``), ``compare`` a trace against the base
#: loop fixture (``compare --no-ngspice``), ``sweep`` a frequency sweep against that
#: fixture with a ``[swept]`` table (``compare --sweep --no-ngspice``).
COMMANDS = ("deck", "ringdown", "peaks", "compare", "sweep")

#: Special kinds of input: a folder, a FIFO (named pipe), the endless ``/dev/zero``,
#: a path that does not exist, a symbolic link to ``/dev/zero``.
SPECIALS = ("folder", "fifo", "dev_zero", "missing", "link_to_dev_zero")

#: What stands at ``compare --out`` before the run (tests/security/corpus_outputs.py): a
#: file; a file where a folder above it goes; a folder xcheck did not write, without and
#: with ``--force``; ``--force`` at the folder holding the inputs; an earlier report with
#: the temporary siblings a killed run left.
OUTPUTS = ("file", "under_file", "foreign_folder", "foreign_folder_forced",
           "holds_input_forced", "strays")


@dataclass(frozen=True)
class Case:
    """One corpus input.

    Attributes
    ----------
    category
        The group it is counted in (the README's table has one row per category).
    name
        Short unique words for the case (also the pytest id).
    command
        One of :data:`COMMANDS`.
    data
        The file's bytes; ignored when ``special`` is set.
    expect
        The exit status xcheck must return: 2 for bad input, 0 where the input is in
        fact valid.
    special
        One of :data:`SPECIALS`, or None for an ordinary file holding ``data``.
    words
        Text the one-paragraph message must hold (the key or line it names), unwrapped.
    suffix
        The input file's name ending (``.toml``, ``.csv``, ``.csv.gz``).
    process
        Run in a child process with a memory limit (a gzip bomb) rather than in-process.
    output
        One of :data:`OUTPUTS` (``compare`` only): the case is about ``--out``, not the
        input, and the message must name the output path instead.
    """

    category: str
    name: str
    command: str
    data: bytes = b""
    expect: int = 2
    special: str | None = None
    words: tuple[str, ...] = ()
    suffix: str = ""
    process: bool = False
    output: str | None = None

    def __post_init__(self) -> None:
        if self.command not in COMMANDS:
            raise ValueError(f"unknown command {self.command!r}")
        if self.special is not None and self.special not in SPECIALS:
            raise ValueError(f"unknown special input {self.special!r}")
        if self.output is not None and (self.output not in OUTPUTS
                                        or self.command != "compare"):
            raise ValueError(f"unknown output case {self.output!r} (compare only)")

    @property
    def file_name(self) -> str:
        """The input's file name (the same for every case of one command)."""
        ending = self.suffix or (".toml" if self.command == "deck" else ".csv")
        return "input" + ending

    @property
    def reads_fixture(self) -> bool:
        """Whether the input is a fixture (``deck``) rather than a trace or peak table."""
        return self.command == "deck"
