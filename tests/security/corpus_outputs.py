"""Output paths for the corpus: what may stand at ``compare --out`` before a run.

The input is the valid base capture (tests/security/corpus_traces.py); the case is the
output path (:data:`corpus_case.OUTPUTS`, set up by tests/security/corpus_run.py's
``make_output``). A file where the report folder goes, a file above it, a folder
xcheck did not write and ``--force`` at the folder holding the inputs are refused in one
paragraph naming the path; ``--force`` over a foreign folder and an earlier run's stray
temporaries are accepted (the strays are removed). The rules are the project's own
(xcheck/atomic.py); exit status 2 for bad input is its convention (common practice, no
source).
"""

from __future__ import annotations

from security.corpus_case import Case
from security.corpus_traces import BASE_TRACE

CATEGORY = "output paths"


def output_cases() -> list[Case]:
    """Every ``--out`` case of the corpus."""

    def case(name: str, output: str, expect: int = 2, words: tuple[str, ...] = ()) -> Case:
        return Case(CATEGORY, name, "compare", BASE_TRACE, expect=expect, words=words,
                    output=output)

    return [
        case("out is an existing file", "file", words=("exists and is not a folder",)),
        case("a file above out", "under_file", words=("taken", "is a file")),
        case("out is a foreign folder", "foreign_folder",
             words=("was not written by xcheck", "--force")),
        case("force over a foreign folder", "foreign_folder_forced", expect=0),
        case("force at the folder holding the inputs", "holds_input_forced",
             words=("holds the input", "delete")),
        case("stray temporaries of a killed run", "strays", expect=0),
    ]
