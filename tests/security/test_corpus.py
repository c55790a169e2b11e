"""Every hostile or malformed input of the corpus gives one clear paragraph and exit 2
(or is accepted, where it is in fact valid), with no traceback, the input untouched
and nothing written outside the output folder.

The cases are data (tests/security/corpus.py); each is run through
``xcheck.cli.main`` in-process with its output captured, or in a child process with
an address-space limit where memory is the point (tests/security/corpus_run.py). The
references are the formats themselves: TOML 1.0 (what tomllib accepts), the README's
fixture format and trace rules, and POSIX file kinds (os.mkfifo, /dev/zero), from
memory. A deck that is written is held to the checks of tests/security/deck_checks.py.
"""

from __future__ import annotations

import os

import pytest

from security.corpus import CORPUS, LOOP_BASE, categories
from security.corpus_case import Case
from security.corpus_run import run_case

#: What the corpus must cover at least (the counts the task set; no source).
MIN_FIXTURES = 60
MIN_TRACES = 40


def _skip_reason(case: Case) -> str | None:
    if case.special == "fifo" and not hasattr(os, "mkfifo"):
        return "needs POSIX FIFOs"
    if case.special in ("dev_zero", "link_to_dev_zero") and not os.path.exists("/dev/zero"):
        return "no /dev/zero"
    if case.process:
        try:
            import resource  # noqa: F401  (POSIX only)
        except ImportError:
            return "needs the resource module (POSIX) for the memory limit"
    return None


@pytest.mark.parametrize("case", CORPUS, ids=[case.name for case in CORPUS])
def test_corpus_case(tmp_path, case: Case):
    reason = _skip_reason(case)
    if reason:
        pytest.skip(reason)
    outcome = run_case(case, tmp_path, LOOP_BASE)
    assert not outcome.problems, (outcome.problems, outcome.stderr[:2000])
    # The verdicts the README's table counts agree with the problems found.
    assert not (outcome.crashed or outcome.injected or outcome.modified)
    assert outcome.clear == (case.expect == 2)
    assert outcome.accepted == (case.expect != 2)


def test_corpus_is_as_large_and_wide_as_required():
    fixtures = [c for c in CORPUS if c.reads_fixture]
    traces = [c for c in CORPUS if not c.reads_fixture]
    assert len(fixtures) >= MIN_FIXTURES and len(traces) >= MIN_TRACES
    # Node-wired fixtures (version 2) are among them, and so are peak tables and compare.
    assert sum(b"version = 2" in c.data for c in fixtures) >= 20
    assert sum(c.command == "peaks" for c in traces) >= 15
    assert sum(c.command == "compare" for c in traces) >= 3
    # Every category holds a refusal; most inputs are refused, some are valid.
    for category in categories():
        assert any(c.expect == 2 for c in CORPUS if c.category == category), category
    assert 0 < sum(c.expect != 2 for c in CORPUS) < len(CORPUS) // 3


@pytest.mark.parametrize("field", ["title", "response", "kind", "value", "probe",
                                   "loop entry", "candidate free key", "node name",
                                   "probe node", "waveform", "part name",
                                   "candidate name", "candidate description"])
def test_every_text_field_gets_every_control_character(field):
    names = {c.name for c in CORPUS}
    for char in ("newline", "carriage return", "form feed", "NUL"):
        assert (f"{char} in the {field}" in names or f"{char} in a {field}" in names), (
            char, field)
