"""Malformed frequency sweeps for the corpus: what ``compare --sweep`` must refuse.

Each case is the bytes of one sweep file, read against the corpus's loop base with a
``[swept]`` table (the impedance of C1 on its own; tests/security/corpus_run.py adds
it). The base sweep is an invented 10 uF capacitor with 50 mOhm ESR, Z = R + 1 / (j w C)
(standard circuit theory, from memory). Every malformed variant must give one paragraph
naming the file (and the line where there is one), exit status 2 (the project's
convention for bad input; common practice, no source) and no traceback.
"""

from __future__ import annotations

import math

from security.corpus_case import Case

CATEGORY = "frequency sweeps"
HEADER = "freq (Hz),|Z| (ohm),phase (deg)"


def _rows(count: int = 12) -> list[str]:
    rows = []
    for k in range(count):
        f = 100.0 * 10 ** (k * 4 / (count - 1))
        z = complex(0.05, -1 / (2 * math.pi * f * 10e-6))
        rows.append(f"{f:.6g},{abs(z):.6g},{math.degrees(math.atan2(z.imag, z.real)):.6g}")
    return rows


def _text(lines: list[str]) -> bytes:
    return ("\n".join(lines) + "\n").encode()


BASE_SWEEP = _text([HEADER, *_rows()])


def sweep_cases() -> list[Case]:
    """Every sweep case of the corpus."""
    rows = _rows()

    def case(name: str, data: bytes = b"", *, special: str | None = None,
             words: tuple[str, ...] = (), suffix: str = ".csv", expect: int = 2) -> Case:
        return Case(CATEGORY, name, "sweep", data, expect=expect, special=special,
                    words=words, suffix=suffix)

    swapped = list(rows)
    swapped[3], swapped[4] = swapped[4], swapped[3]
    return [
        case("a valid sweep", BASE_SWEEP, expect=0),
        case("empty sweep file", b""),
        case("sweep header only", _text([HEADER])),
        case("sweep with two points", _text([HEADER, *rows[:2]])),
        case("NaN cell in a sweep", _text([HEADER, *rows[:5], "1000,nan,-80", *rows[6:]])),
        case("inf cell in a sweep", _text([HEADER, *rows[:5], "1000,inf,-80", *rows[6:]])),
        case("frequencies out of order", _text([HEADER, *swapped])),
        case("repeated frequency", _text([HEADER, *rows[:5], rows[4], *rows[5:]])),
        case("negative frequency", _text([HEADER, "-100,1,-80", *rows[1:]])),
        case("magnitude without a unit",
             _text(["freq (Hz),|Z|,phase (deg)", *rows]), words=("unit",)),
        case("phase without a unit", _text(["freq (Hz),|Z| (ohm),phase", *rows]),
             words=("phase",)),
        case("sweep values near 1e300", _text([HEADER, *rows[:5], "1000,1e300,-80", *rows[6:]])),
        case("binary garbage as a sweep", bytes(range(256)) * 8),
        case("mixed delimiters in a sweep",
             _text([HEADER, *rows[:5], rows[5].replace(",", ";"), *rows[6:]])),
        case("a Touchstone file of garbage", b"this is not touchstone\n1 2 3\n",
             suffix=".s1p"),
        case("a folder as the sweep", special="folder"),
        case("a FIFO as the sweep", special="fifo"),
        case("/dev/zero as the sweep", special="dev_zero"),
        case("a missing sweep file", special="missing"),
    ]
