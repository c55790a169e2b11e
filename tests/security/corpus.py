"""The corpus of hostile and malformed inputs, as data.

:data:`CORPUS` holds every case (:class:`corpus_case.Case`): fixture files for
``xcheck deck`` (tests/security/corpus_fixtures.py) and traces and peak tables for
``xcheck ringdown`` and ``xcheck compare`` (tests/security/corpus_traces.py), and what
may stand at ``compare --out`` (tests/security/corpus_outputs.py). Each names
its category, the file's bytes and the exit status expected; tests/security/corpus_run.py
runs one, tests/security/test_corpus.py runs them all and
tests/security/corpus_table.py prints the README's table of them.
"""

from __future__ import annotations

from security.corpus_case import Case
from security.corpus_fixtures import LOOP_BASE, fixture_cases
from security.corpus_outputs import output_cases
from security.corpus_sweeps import sweep_cases
from security.corpus_traces import trace_cases

__all__ = ["CORPUS", "LOOP_BASE", "Case", "categories"]

#: Every case, fixtures first, output paths last.
CORPUS: tuple[Case, ...] = tuple(fixture_cases() + trace_cases() + output_cases()
                                 + sweep_cases())

_names = [case.name for case in CORPUS]
if len(set(_names)) != len(_names):
    raise ValueError("two corpus cases share a name")


def categories() -> list[str]:
    """The categories in corpus order, each once."""
    return list(dict.fromkeys(case.category for case in CORPUS))
