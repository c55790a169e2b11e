"""User text in report.md is inert: no raw HTML, no link or image the fixture wrote.

Reference for what renders: CommonMark 0.30 (backslash escapes of ASCII punctuation,
raw HTML, inline links and images, code spans) and the GitHub-flavoured markdown
spec (tables split at unescaped ``|``, extended autolinks at ``www.`` and ``scheme://``),
from memory. The hostile strings are invented.
"""

from __future__ import annotations

import json
import re

import pytest

from compare_cases import LOSSY_JIG_TOML, variant, write_trace
from xcheck.cli import main
from xcheck.report.markdown import escape_markdown

HOSTILE_TITLE = ('Jig <img src=x onerror=alert(1)> <script>alert(2)</script> '
                 '![pixel](http://tracker.invalid/p.png) [click](https://phish.invalid) '
                 '`code` a|b www.evil.invalid &amp; <a href="javascript:x">y</a>')
HOSTILE_CANDIDATE = 'esr-<b>only</b>|![x](http://img.invalid/x.png)'
HOSTILE_DESCRIPTION = ('loss <svg onload=alert(3)> [here](http://phish.invalid/login)\n'
                       '# injected heading')

#: Markup that must never appear in the report when it came from the user's text.
FORBIDDEN = [r"<img", r"<script", r"<svg", r"<a ", r"<b>", r"onerror=alert\(1\)\s*>",
             r"\]\(http", r"!\[pixel\]", r"(?<!\\)\[click(?<!\\)\]", r"^# injected",
             r"(?<!\\)`code(?<!\\)`", r"(?<!\\)https?://", r"(?<!\\)www\."]


@pytest.mark.parametrize("text, expected", [
    # Each expectation is the CommonMark-escaped form, written out by hand.
    ("<img src=x onerror=y>", "&lt;img src=x onerror=y&gt;"),
    ("![a](http://h/x.png)", r"\!\[a\]\(http\://h/x.png\)"),
    ("a|b `c` \\", r"a\|b \`c\` \\"),
    ("one\ntwo\r\nthree\u2028four", "one two three four"),
    ("see www.example.invalid", r"see www\.example.invalid"),
    ("R = 5 mΩ ± 2 %, α: 640 /s", "R = 5 mΩ ± 2 %, α: 640 /s"),  # ordinary text unchanged
])
def test_escape_markdown_makes_each_construct_inert(text, expected):
    assert escape_markdown(text) == expected


def test_hostile_title_and_candidate_reach_report_md_inert(tmp_path, printed):
    toml = variant(LOSSY_JIG_TOML, ('title = "Lossy jig ring-down (invented example)"',
                                    "title = " + json.dumps(HOSTILE_TITLE)))
    toml += ("\n[candidates]\n"
             f"[candidates.{json.dumps(HOSTILE_CANDIDATE)}]\n"
             'base = "as-measured"\nfree = ["C1.esr"]\n'
             f"description = {json.dumps(HOSTILE_DESCRIPTION)}\n")
    fixture = tmp_path / "hostile <img src=x>.toml"
    fixture.write_text(toml, encoding="utf-8")
    out = tmp_path / "out"
    code = main(["compare", str(fixture), "--trace", str(write_trace(tmp_path, 21)),
                 "--out", str(out), "--no-ngspice", "--quiet"])
    assert code in (0, 1), printed().err
    text = (out / "report.md").read_text(encoding="utf-8")
    # The user's words are still there, escaped (so the check below is not vacuous).
    assert r"&lt;img src=x onerror=alert\(1\)&gt;" in text
    assert r"esr-&lt;b&gt;only&lt;/b&gt;\|\!\[x\]" in text
    assert "hostile &lt;img src=x&gt;.toml" in text  # the file name in the Inputs table
    for pattern in FORBIDDEN:
        assert not re.search(pattern, text, re.MULTILINE), pattern
    # Every table row keeps its column count: an escaped | does not split a cell (GFM).
    for line in text.splitlines():
        if line.startswith("| ") and "esr-&lt;b&gt;" in line:
            cells = re.split(r"(?<!\\)\|", line.strip()[1:-1])
            assert len(cells) in (7, 11), line  # fitted values; candidates
