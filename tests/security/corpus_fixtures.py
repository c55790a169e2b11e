"""Hostile and malformed fixture files for the corpus (``xcheck deck``).

Each case is one variant of an invented base fixture: the series loop
:data:`LOOP_BASE` (format version 1, with a ``[candidates]`` table) or the node-wired
:data:`NODE_BASE` (version 2, an LC filter with a load behind a switched supply). The
variants come from the README's fixture format: every text field with a line break,
carriage return, form feed or NUL in it; SPICE and control-language words; comment,
continuation and backslash tricks; names of a megabyte, names SPICE would read as the
same (it ignores case) or that collide with the nodes and elements xcheck makes itself;
broken encodings; files that are not regular files; numbers at and past the double's
range; the wrong TOML types; extreme part values.
"""

from __future__ import annotations

import codecs
import json

from security.corpus_case import Case

#: An invented series ring-down, format version 1.
LOOP_BASE = '''\
title = "Corpus jig, series ring-down (invented example)"
response = "natural"
loop = ["SW1", "C1", "R1", "L1"]
probe = "C1"

[parts.SW1]
kind = "switch"
resistance = "5m"

[parts.C1]
kind = "capacitor"
nominal = "10u"
esr = "20m"
initial = "12"

[parts.R1]
kind = "resistor"
nominal = "1"

[parts.L1]
kind = "inductor"
nominal = "220u"
dcr = "0.1"

[candidates.esr-only]
base = "as-measured"
free = ["C1.esr"]
description = "all unexplained loss is capacitor ESR"
'''

#: An invented LC filter with a load behind a supply switched on at 20 us (version 2).
NODE_BASE = '''\
version = 2
title = "Corpus LC filter with load (invented example)"
response = "step"
probe = ["out", "0"]

[parts.V1]
kind = "voltage_source"
volts = "24"
source_resistance = "50m"
waveform = "step"
delay = "20u"
nodes = ["in", "0"]

[parts.L1]
kind = "inductor"
nominal = "10u"
dcr = "15m"
nodes = ["in", "out"]

[parts.C1]
kind = "capacitor"
nominal = "100u"
esr = "30m"
nodes = ["out", "gnd"]

[parts.R1]
kind = "resistor"
nominal = "4.7"
nodes = ["out", "0"]
'''


def swap(base: str, *edits: tuple[str, str]) -> str:
    """``base`` with each ``(old, new)`` made; each ``old`` must occur exactly once."""
    for old, new in edits:
        if base.count(old) != 1:
            raise ValueError(f"{old!r} occurs {base.count(old)} times, not once")
        base = base.replace(old, new)
    return base


def toml_string(text: str) -> str:
    """``text`` as a TOML basic string (JSON's escapes are TOML's: \\n \\r \\f \\u0000)."""
    return json.dumps(text)


def rename_part(base: str, old: str, new: str, loop: bool = True) -> str:
    """``base`` with part ``old`` renamed to ``new`` (in the loop too, unless ``loop`` is
    False); the table key is quoted unless ``new`` is a bare TOML key."""
    bare = bool(new) and new.replace("_", "a").replace("-", "a").isalnum() and new.isascii()
    text = base.replace(f"[parts.{old}]", f"[parts.{new if bare else toml_string(new)}]")
    if loop:
        text = text.replace(f'"{old}", ', f"{toml_string(new)}, ")
    return text


# --------------------------------------------------------------------------- text fields

#: Every text field of the two bases: (field, base, the line holding it, its value).
TEXT_FIELDS: tuple[tuple[str, str, str, str], ...] = (
    ("title", LOOP_BASE, 'title = "Corpus jig, series ring-down (invented example)"',
     "Corpus jig, series ring-down (invented example)"),
    ("response", LOOP_BASE, 'response = "natural"', "natural"),
    ("kind", LOOP_BASE, 'kind = "capacitor"', "capacitor"),
    ("value", LOOP_BASE, 'nominal = "10u"', "10u"),
    ("probe", LOOP_BASE, 'probe = "C1"', "C1"),
    ("loop entry", LOOP_BASE, 'loop = ["SW1", "C1", "R1", "L1"]', "L1"),
    ("candidate description", LOOP_BASE,
     'description = "all unexplained loss is capacitor ESR"',
     "all unexplained loss is capacitor ESR"),
    ("candidate free key", LOOP_BASE, 'free = ["C1.esr"]', "C1.esr"),
    ("node name", NODE_BASE, 'nodes = ["in", "out"]', "in"),
    ("probe node", NODE_BASE, 'probe = ["out", "0"]', "out"),
    ("waveform", NODE_BASE, 'waveform = "step"', "step"),
)

#: The characters put into each text field, by name.
CONTROL_CHARACTERS = (("newline", "\n"), ("carriage return", "\r"), ("form feed", "\f"),
                      ("NUL", "\0"))


def _with_character(line: str, value: str, char: str) -> str:
    """``line`` with ``char`` put into the middle of ``value`` (a TOML escape)."""
    middle = len(value) // 2
    hostile = toml_string(value[:middle] + char + value[middle:])
    return line.replace(json.dumps(value), hostile)


def _control_character_cases() -> list[Case]:
    cases = []
    for field, base, line, value in TEXT_FIELDS:
        for char_name, char in CONTROL_CHARACTERS:
            text = swap(base, (line, _with_character(line, value, char)))
            # A description is free text that reaches only the report, which folds
            # line breaks and escapes the rest (tests/security/test_markdown_escaping.py).
            expect = 0 if field == "candidate description" else 2
            cases.append(Case("control characters in text fields",
                              f"{char_name} in the {field}", "deck", text.encode(),
                              expect=expect))
    # Part names are TOML keys: a quoted key may hold an escape too.
    for char_name, char in CONTROL_CHARACTERS:
        text = rename_part(LOOP_BASE, "R1", "R" + char + "1")
        cases.append(Case("control characters in text fields",
                          f"{char_name} in a part name", "deck", text.encode()))
        text = swap(LOOP_BASE, ("[candidates.esr-only]",
                                f"[candidates.{toml_string('esr' + char + '-only')}]"))
        cases.append(Case("control characters in text fields",
                          f"{char_name} in a candidate name", "deck", text.encode()))
    # Raw control bytes in the file itself (TOML allows none but tab outside comments).
    title = 'title = "Corpus jig, series ring-down (invented example)"'
    for char_name, raw in (("raw NUL byte", "\0"), ("raw carriage return", "\r"),
                           ("raw form feed", "\f"), ("raw vertical tab", "\v")):
        text = swap(LOOP_BASE, (title, title.replace("jig,", "jig" + raw + ",")))
        cases.append(Case("control characters in text fields", f"{char_name} in the title",
                          "deck", text.encode(), words=("line 1",)))
    return cases


# --------------------------------------------------------------------------- SPICE words

_TITLE = 'title = "Corpus jig, series ring-down (invented example)"'


def _title(text: str) -> bytes:
    return swap(LOOP_BASE, (_TITLE, "title = " + toml_string(text))).encode()


def _spice_word_cases() -> list[Case]:
    category = "SPICE and control words"
    cases = [
        Case(category, "title .control", "deck", _title(".control"), words=("title",)),
        Case(category, "title with .endc after text", "deck", _title("jig .endc"),
             words=("title",)),
        Case(category, "title .include /etc/passwd", "deck",
             _title(".include /etc/passwd"), words=("title",)),
        Case(category, "title with .lib", "deck", _title("jig .lib models.lib tt"),
             words=("title",)),
        Case(category, "title shell rm", "deck", _title("jig; shell rm -rf /"),
             words=("title",)),
        Case(category, "title newline .control shell", "deck",
             _title("jig\n.control\nshell touch /tmp/x\n.endc"), words=("title",)),
        Case(category, "title with system and exec", "deck",
             _title("jig system exec"), words=("title",)),
        Case(category, "part named shell", "deck",
             rename_part(LOOP_BASE, "R1", "shell").encode(), words=("parts.shell",)),
        Case(category, "part named control", "deck",
             rename_part(LOOP_BASE, "R1", "control").encode()),
        Case(category, "part named .include", "deck",
             rename_part(LOOP_BASE, "R1", ".include").encode()),
        Case(category, "part named .lib", "deck",
             rename_part(LOOP_BASE, "R1", ".lib").encode()),
        Case(category, "part named .endc", "deck",
             rename_part(LOOP_BASE, "R1", ".endc").encode()),
        Case(category, "node named shell", "deck",
             NODE_BASE.replace('"in"', '"shell"').encode(), words=("shell",)),
        Case(category, "node named .control", "deck",
             NODE_BASE.replace('"in"', '".control"').encode()),
        Case(category, "kind .include", "deck",
             swap(LOOP_BASE, ('kind = "resistor"', 'kind = ".include x"')).encode(),
             words=("parts.R1.kind",)),
        Case(category, "candidate named .control (not in the deck)", "deck",
             swap(LOOP_BASE, ("[candidates.esr-only]", '[candidates.".control"]')).encode(),
             expect=0),
        Case(category, "description .endc shell (not in the deck)", "deck",
             swap(LOOP_BASE, ('"all unexplained loss is capacitor ESR"',
                              toml_string(".endc\nshell rm -rf /"))).encode(), expect=0),
    ]
    return cases


def _comment_trick_cases() -> list[Case]:
    category = "comment, continuation and backslash tricks"
    cases = []
    for lead in ("+", "*", ";", "$"):
        cases.append(Case(category, f"title starting with {lead!r}", "deck",
                          _title(f"{lead} .tran 1 1"), words=("title",)))
    cases += [
        Case(category, "title with ; .control in the middle", "deck",
             _title("jig ; .control"), words=("title",)),
        Case(category, "title with $ and ; (plain text)", "deck",
             _title("jig $5 ; 10% off"), expect=0),
        Case(category, "title ending in a backslash", "deck", _title("jig \\"), expect=0),
        Case(category, "title with backslash newline", "deck", _title("jig \\\n.end"),
             words=("title",)),
        Case(category, "title of backslashes", "deck", _title("\\\\\\\\ \\n \\r"), expect=0),
        Case(category, "part name with a backslash", "deck",
             rename_part(LOOP_BASE, "R1", "R\\1").encode()),
        Case(category, "part name starting with +", "deck",
             rename_part(LOOP_BASE, "R1", "+R1").encode()),
        Case(category, "part name starting with *", "deck",
             rename_part(LOOP_BASE, "R1", "*R1").encode()),
        Case(category, "node name starting with +", "deck",
             NODE_BASE.replace('"in"', '"+in"').encode()),
        Case(category, "node name with ;", "deck",
             NODE_BASE.replace('"in"', '"in;x"').encode()),
        Case(category, "TOML line starting with +", "deck",
             (LOOP_BASE + "+ .control\n").encode(), words=("line",)),
        Case(category, "TOML line starting with * and .control", "deck",
             (LOOP_BASE + "* .control\n").encode(), words=("line",)),
        Case(category, "TOML comment holding .control", "deck",
             (LOOP_BASE + "# .control\n# shell rm -rf /\n").encode(), expect=0),
        Case(category, "backslash in a value", "deck",
             swap(LOOP_BASE, ('nominal = "10u"', 'nominal = "10\\\\u"')).encode(),
             words=("parts.C1.nominal",)),
    ]
    return cases


# --------------------------------------------------------------------------- names


def _name_cases() -> list[Case]:
    category = "long and colliding names"
    megabyte = "Q" * 1_000_000
    cases = [
        Case(category, "1 MB part name", "deck",
             rename_part(LOOP_BASE, "R1", megabyte, loop=False).encode(),
             words=("(1000000 characters)",)),
        Case(category, "1 MB title", "deck", _title("T" * 1_000_000)),
        Case(category, "1 MB node name", "deck",
             swap(NODE_BASE, ('nodes = ["in", "0"]',
                              'nodes = ["' + "n" * 1_000_000 + '", "0"]')).encode(),
             words=("(1000002 characters)",)),
        Case(category, "1 MB kind", "deck",
             swap(LOOP_BASE, ('kind = "resistor"',
                              'kind = "' + "k" * 1_000_000 + '"')).encode()),
        Case(category, "1 MB candidate name", "deck",
             swap(LOOP_BASE, ("[candidates.esr-only]",
                              "[candidates." + "c" * 1_000_000 + "]")).encode()),
        Case(category, "parts C1 and c1 (SPICE ignores case)", "deck",
             (LOOP_BASE + '\n[parts.c1]\nkind = "resistor"\nnominal = "1"\n').encode(),
             words=("parts.c1", "case")),
        Case(category, "loop naming c1 for part C1", "deck",
             swap(LOOP_BASE, ('"SW1", "C1"', '"SW1", "c1"')).encode()),
        Case(category, "nodes out and OUT", "deck",
             swap(NODE_BASE, ('nodes = ["out", "gnd"]', 'nodes = ["OUT", "gnd"]')).encode(),
             words=("OUT",)),
        Case(category, "ground spelt GND, gnd and 0 (one node)", "deck",
             swap(NODE_BASE, ('nodes = ["in", "0"]', 'nodes = ["in", "GND"]')).encode(),
             expect=0),
        Case(category, "part named like a loop node (n1)", "deck",
             rename_part(LOOP_BASE, "R1", "n1").encode(), expect=0),
        Case(category, "part named sense (the current-sense node)", "deck",
             rename_part(LOOP_BASE, "R1", "sense").encode(), expect=0),
        Case(category, "part named like an element (C1_esr)", "deck",
             rename_part(LOOP_BASE, "R1", "C1_esr").encode(), expect=0),
        Case(category, "part named like a deck element (R_C1_esr)", "deck",
             rename_part(LOOP_BASE, "R1", "R_C1_esr").encode(), expect=0),
        Case(category, "node named like an internal node (C1_a)", "deck",
             NODE_BASE.replace('"in"', '"C1_a"').encode(), expect=0),
        Case(category, "node named like a loop node (n1)", "deck",
             NODE_BASE.replace('"in"', '"n1"').encode(), expect=0),
        Case(category, "node named 00 (not ground)", "deck",
             NODE_BASE.replace('"in"', '"00"').encode(), expect=0),
        Case(category, "node named sense", "deck",
             NODE_BASE.replace('"in"', '"sense"').encode(), expect=0),
        Case(category, "part named like a deck directive word (tran)", "deck",
             rename_part(LOOP_BASE, "R1", "tran").encode(), expect=0),
        Case(category, "part name of 33 characters", "deck",
             rename_part(LOOP_BASE, "R1", "R" * 33).encode()),
        Case(category, "non-ASCII part name", "deck",
             rename_part(LOOP_BASE, "R1", "Rµ1").encode()),
        Case(category, "empty part name", "deck", rename_part(LOOP_BASE, "R1", "").encode()),
    ]
    return cases


# --------------------------------------------------------------------------- encodings


def _encoding_cases() -> list[Case]:
    category = "encodings and file kinds"
    return [
        Case(category, "invalid UTF-8 byte", "deck",
             LOOP_BASE.encode().replace(b"Corpus jig", b"Corpus \xff jig"),
             words=("UTF-8", "line 1")),
        Case(category, "overlong UTF-8 slash", "deck",
             LOOP_BASE.encode().replace(b"Corpus jig", b"Corpus \xc0\xaf jig")),
        Case(category, "UTF-16 with byte-order mark", "deck",
             codecs.BOM_UTF16_LE + LOOP_BASE.encode("utf-16-le"), words=("UTF-16",)),
        Case(category, "UTF-16 big-endian without a mark", "deck",
             LOOP_BASE.encode("utf-16-be"), words=("zero byte",)),
        Case(category, "UTF-8 byte-order mark", "deck", codecs.BOM_UTF8 + LOOP_BASE.encode(),
             expect=0),
        Case(category, "empty file", "deck", b"", words=("empty",)),
        Case(category, "white space only", "deck", b"  \n\t\n\n"),
        Case(category, "comment only", "deck", b"# nothing here\n"),
        Case(category, "Latin-1 micro sign", "deck",
             LOOP_BASE.encode().replace(b'"10u"', b'"10\xb5"')),
        Case(category, "lone surrogate escape", "deck", _title_raw('"jig \\ud800"')),
        Case(category, "binary garbage", "deck", bytes(range(256)) * 16),
        Case(category, "a folder", "deck", special="folder", words=("folder",)),
        Case(category, "a FIFO", "deck", special="fifo", words=("FIFO",)),
        Case(category, "/dev/zero", "deck", special="dev_zero", words=("character device",)),
        Case(category, "a link to /dev/zero", "deck", special="link_to_dev_zero",
             words=("character device",)),
        Case(category, "a missing file", "deck", special="missing"),
        Case(category, "just over 1 MiB", "deck",
             LOOP_BASE.encode() + b"#" * (2**20 + 1 - len(LOOP_BASE.encode())),
             words=("1 MiB",)),
    ]


def _title_raw(raw_value: str) -> bytes:
    return swap(LOOP_BASE, (_TITLE, "title = " + raw_value)).encode()


# --------------------------------------------------------------------------- numbers


def _nominal(raw: str, base: str = LOOP_BASE, line: str = 'nominal = "10u"') -> bytes:
    return swap(base, (line, raw)).encode()


def _number_cases() -> list[Case]:
    category = "numbers"
    key = ("parts.C1.nominal",)
    cases = [
        Case(category, "nominal 1e308 (string)", "deck", _nominal('nominal = "1e308"'),
             words=key),
        Case(category, "nominal 1e309 (string, beyond a double)", "deck",
             _nominal('nominal = "1e309"'), words=key),
        Case(category, "nominal 1e308 (TOML float)", "deck", _nominal("nominal = 1e308"),
             words=key),
        Case(category, "nominal 1e-320 (subnormal)", "deck", _nominal('nominal = "1e-320"'),
             words=key),
        Case(category, "nominal 1e-320 (TOML float)", "deck", _nominal("nominal = 1e-320"),
             words=key),
        Case(category, "ESR 1e-320 (subnormal)", "deck",
             swap(LOOP_BASE, ('esr = "20m"', 'esr = "1e-320"')).encode(),
             words=("parts.C1.esr",)),
        Case(category, "initial 1e-320 V (subnormal)", "deck",
             swap(LOOP_BASE, ('initial = "12"', 'initial = "1e-320"')).encode(), expect=0),
        Case(category, "nominal nan (TOML)", "deck", _nominal("nominal = nan"), words=key),
        Case(category, "nominal 'nan' (string)", "deck", _nominal('nominal = "nan"'),
             words=key),
        Case(category, "nominal inf (TOML)", "deck", _nominal("nominal = inf"), words=key),
        Case(category, "nominal '-inf' (string)", "deck", _nominal('nominal = "-inf"'),
             words=key),
        Case(category, "nominal hex integer 0x10", "deck", _nominal("nominal = 0x10"),
             expect=0),
        Case(category, "nominal '0x10' (string)", "deck", _nominal('nominal = "0x10"'),
             words=key),
        Case(category, "nominal of 5000 digits (string)", "deck",
             _nominal('nominal = "' + "7" * 5000 + '"'), words=key),
        Case(category, "nominal of 5000 digits (TOML integer)", "deck",
             _nominal("nominal = " + "7" * 5000)),
        Case(category, "nominal 1e99999 (string)", "deck", _nominal('nominal = "1e99999"'),
             words=key),
        Case(category, "nominal with decimal comma", "deck", _nominal('nominal = "4,7u"'),
             words=key),
        Case(category, "nominal 10M (the M trap)", "deck", _nominal('nominal = "10M"'),
             words=key),
        Case(category, "initial 1e308", "deck",
             swap(LOOP_BASE, ('initial = "12"', 'initial = "1e308"')).encode(),
             words=("parts.C1.initial",)),
        Case(category, "tolerance 1e308%", "deck",
             swap(LOOP_BASE, ('nominal = "10u"', 'nominal = "10u"\ntolerance = "1e308%"')
                  ).encode()),
        Case(category, "tolerance nan", "deck",
             swap(LOOP_BASE, ('nominal = "10u"', 'nominal = "10u"\ntolerance = nan')
                  ).encode()),
        Case(category, "source delay inf", "deck",
             swap(NODE_BASE, ('delay = "20u"', "delay = inf")).encode(),
             words=("parts.V1.delay",)),
        Case(category, "source volts 1e308", "deck",
             swap(NODE_BASE, ('volts = "24"', 'volts = "1e308"')).encode(),
             words=("parts.V1.volts",)),
        Case(category, "source delay 1e300 s", "deck",
             swap(NODE_BASE, ('delay = "20u"', 'delay = "1e300"')).encode()),
        Case(category, "negative capacitance", "deck", _nominal('nominal = "-10u"'),
             words=key),
        Case(category, "version 2 as a string", "deck",
             swap(NODE_BASE, ("version = 2", 'version = "2"')).encode(), words=("version",)),
        Case(category, "version 3", "deck", swap(NODE_BASE, ("version = 2", "version = 3")
                                                 ).encode(), words=("version",)),
        Case(category, "version 2.0 (a float)", "deck",
             swap(NODE_BASE, ("version = 2", "version = 2.0")).encode(), expect=0),
        Case(category, "version of 5000 digits", "deck",
             swap(NODE_BASE, ("version = 2", "version = " + "2" * 5000)).encode()),
    ]
    return cases


# --------------------------------------------------------------------------- types


def _type_cases() -> list[Case]:
    category = "wrong types"
    cases = [
        Case(category, "title true", "deck", _title_raw("true"), words=("title",)),
        Case(category, "title an array", "deck", _title_raw('["a", "b"]'), words=("title",)),
        Case(category, "title a table", "deck", _title_raw("{ a = 1 }"), words=("title",)),
        Case(category, "title a date", "deck", _title_raw("1979-05-27T07:32:00Z"),
             words=("title",)),
        Case(category, "title a number", "deck", _title_raw("42"), words=("title",)),
        Case(category, "nominal true", "deck", _nominal("nominal = true"),
             words=("parts.C1.nominal",)),
        Case(category, "nominal an array", "deck", _nominal('nominal = ["10u"]'),
             words=("parts.C1.nominal",)),
        Case(category, "nominal a table", "deck", _nominal('nominal = { value = "10u" }'),
             words=("parts.C1.nominal",)),
        Case(category, "nominal a time of day", "deck", _nominal("nominal = 07:32:00"),
             words=("parts.C1.nominal",)),
        Case(category, "kind true", "deck",
             swap(LOOP_BASE, ('kind = "resistor"', "kind = true")).encode(),
             words=("parts.R1.kind",)),
        Case(category, "kind an array", "deck",
             swap(LOOP_BASE, ('kind = "resistor"', 'kind = ["resistor"]')).encode(),
             words=("parts.R1.kind",)),
        Case(category, "response false", "deck",
             swap(LOOP_BASE, ('response = "natural"', "response = false")).encode(),
             words=("response",)),
        Case(category, "probe a number", "deck",
             swap(LOOP_BASE, ('probe = "C1"', "probe = 1")).encode(), words=("probe",)),
        Case(category, "probe a table of nonsense", "deck",
             swap(LOOP_BASE, ('probe = "C1"', "probe = { voltage = [1, 2] }")).encode(),
             words=("probe",)),
        Case(category, "loop a string", "deck",
             swap(LOOP_BASE, ('loop = ["SW1", "C1", "R1", "L1"]', 'loop = "SW1 C1 R1 L1"')
                  ).encode(), words=("loop",)),
        Case(category, "loop of numbers", "deck",
             swap(LOOP_BASE, ('loop = ["SW1", "C1", "R1", "L1"]', "loop = [1, 2, 3]")
                  ).encode(), words=("loop",)),
        Case(category, "parts an array of tables", "deck",
             LOOP_BASE.replace("[parts.", "[[partz.").replace("]\nkind", "]]\nkind")
             .replace('loop = ["SW1", "C1", "R1", "L1"]\n',
                      'loop = ["SW1", "C1", "R1", "L1"]\nparts = [1, 2]\n').encode(),
             words=("parts",)),
        Case(category, "a part that is a string", "deck",
             swap(LOOP_BASE, ('[parts.R1]\nkind = "resistor"\nnominal = "1"\n',
                              '[parts]\nR1 = "1 ohm"\n')).encode(), words=("parts.R1",)),
        Case(category, "nodes a string", "deck",
             swap(NODE_BASE, ('nodes = ["in", "out"]', 'nodes = "in out"')).encode(),
             words=("parts.L1.nodes",)),
        Case(category, "nodes of three", "deck",
             swap(NODE_BASE, ('nodes = ["in", "out"]', 'nodes = ["in", "out", "0"]')).encode(),
             words=("parts.L1.nodes",)),
        Case(category, "nodes of booleans", "deck",
             swap(NODE_BASE, ('nodes = ["in", "out"]', "nodes = [true, false]")).encode(),
             words=("parts.L1.nodes",)),
        Case(category, "current probe of a boolean", "deck",
             swap(NODE_BASE, ('probe = ["out", "0"]', "probe = { current = true }")).encode(),
             words=("probe",)),
        Case(category, "free list of tables", "deck",
             swap(LOOP_BASE, ('free = ["C1.esr"]', "free = [{ a = 1 }]")).encode()),
        Case(category, "description a number", "deck",
             swap(LOOP_BASE, ('"all unexplained loss is capacitor ESR"', "12")).encode()),
        Case(category, "deeply nested arrays", "deck",
             swap(LOOP_BASE, ('probe = "C1"', "probe = " + "[" * 3000 + "]" * 3000)).encode(),
             words=("too deeply",)),
    ]
    return cases


# --------------------------------------------------------------------------- part values


def _extreme_value_cases() -> list[Case]:
    category = "extreme part values"
    cap = 'nominal = "10u"'
    ind = 'nominal = "220u"'
    res = 'nominal = "1"'
    return [
        Case(category, "1e-30 F capacitor", "deck", _nominal('nominal = "1e-30"'), expect=0),
        Case(category, "1e30 F capacitor", "deck", _nominal('nominal = "1e30"'), expect=0),
        Case(category, "1e30 ohm resistor", "deck", _nominal('nominal = "1e30"', line=res),
             expect=0),
        Case(category, "1e-30 ohm resistor", "deck", _nominal('nominal = "1e-30"', line=res),
             expect=0),
        Case(category, "1e-30 H inductor", "deck", _nominal('nominal = "1e-30"', line=ind),
             expect=0),
        Case(category, "1e30 H inductor", "deck", _nominal('nominal = "1e30"', line=ind),
             expect=0),
        Case(category, "1e30 ohm ESR", "deck",
             swap(LOOP_BASE, ('esr = "20m"', 'esr = "1e30"')).encode(), expect=0),
        Case(category, "1e-300 V initial", "deck",
             swap(LOOP_BASE, ('initial = "12"', 'initial = "1e-300"')).encode(), expect=0),
        Case(category, "1e-30 F and 1e30 H together", "deck",
             swap(LOOP_BASE, (cap, 'nominal = "1e-30"'), (ind, 'nominal = "1e30"')).encode(),
             expect=0),
        Case(category, "1e-30 F in node wiring", "deck",
             _nominal('nominal = "1e-30"', NODE_BASE, 'nominal = "100u"'), expect=0),
        Case(category, "1e30 ohm load in node wiring", "deck",
             _nominal('nominal = "1e30"', NODE_BASE, 'nominal = "4.7"'), expect=0),
        Case(category, "zero inductance", "deck", _nominal('nominal = "0"', line=ind),
             words=("parts.L1.nominal",)),
    ]


def fixture_cases() -> list[Case]:
    """Every fixture case of the corpus."""
    return (_control_character_cases() + _spice_word_cases() + _comment_trick_cases()
            + _name_cases() + _encoding_cases() + _number_cases() + _type_cases()
            + _extreme_value_cases())
