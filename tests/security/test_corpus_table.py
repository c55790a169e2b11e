"""The README's corpus table is the one tests/security/corpus_table.py generates.

The table's numbers follow from the corpus definitions once every case behaves as
defined, which tests/security/test_corpus.py checks case by case; here the README is
compared with the table predicted from the definitions, and the script's counting of
real runs is checked on one case of each category against the same prediction. No
outside reference applies: the numbers checked are counts of the project's own corpus
(common practice for generated documentation, no source).
"""

from __future__ import annotations

from security.corpus import CORPUS, categories
from security.corpus_case import Case
from security.corpus_run import Outcome
from security.corpus_table import (
    COLUMNS,
    README,
    measured_counts,
    predicted_counts,
    readme_table,
    render,
    run_all,
    with_table,
)


def test_readme_table_matches_the_corpus_definitions():
    text = README.read_text(encoding="utf-8")
    assert readme_table(text) == render(predicted_counts(CORPUS)), (
        "regenerate the table: python tests/security/corpus_table.py --readme")


def test_readme_table_counts_every_case_once_per_category():
    rows = readme_table(README.read_text(encoding="utf-8")).splitlines()[2:-1]
    assert [row.split(" | ")[0].lstrip("| ") for row in rows] == categories()
    tried = {row.split(" | ")[0].lstrip("| "): int(row.split(" | ")[1]) for row in rows}
    for category in categories():
        assert tried[category] == sum(c.category == category for c in CORPUS)


def test_counting_real_runs_gives_the_predicted_table():
    # One case of each category, run as the script runs them.
    sample = [next(c for c in CORPUS if c.category == category and not c.process)
              for category in categories()]
    measured = measured_counts(run_all(sample))
    assert render(measured) == render(predicted_counts(sample))


def test_a_crash_an_injection_and_a_changed_input_are_counted():
    case = Case(categories()[0], "invented", "deck")
    outcome = Outcome(None, "", "Traceback", crashed=True, injected=True, modified=True)
    row = measured_counts([(case, outcome)])[case.category]
    assert dict(zip(COLUMNS[1:], row)) == {
        "cases tried": 1, "clear errors": 0, "valid, accepted": 0, "crashes": 1,
        "injections": 1, "inputs modified": 1}


def test_writing_the_table_replaces_only_the_marked_block():
    text = README.read_text(encoding="utf-8")
    replaced = with_table(text, "| new |\n")
    assert readme_table(replaced) == "| new |\n"
    head = text.split("<!-- corpus table")[0]
    tail = text.split("<!-- end of corpus table -->")[1]
    assert replaced.startswith(head) and replaced.endswith(tail)
