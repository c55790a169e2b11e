"""The Bode figure of a sweep: a readable, byte-stable PNG that draws what it is given.

References: the series RLC impedance Z = R + jwL + 1/(jwC) and its resonance
f0 = 1 / (2 pi sqrt(LC)) (any circuits textbook, from memory); ln(k a / a) = ln k and
angle(a e^{j phi} / a) = phi (complex arithmetic). matplotlib.image.imread (through
Pillow) reads each file back and gives its size in pixels, which is matplotlib's
documented ``figsize`` (inches) times ``dpi``; Pillow reads the PNG text chunks; the PNG
signature ``89 50 4E 47 0D 0A 1A 0A`` is from the PNG specification (from memory).
matplotlib's own mathtext parser says which titles it would refuse. Engineering tick
labels ("1 kHz") are SI prefixes (the SI brochure; common practice). The sweep is
invented: a 1 uH, 1 nF, 0.5 ohm series jig swept from 100 Hz to 10 MHz.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator

import matplotlib.cbook
import matplotlib.image
import matplotlib.mathtext
import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.figure import Figure
from PIL import Image

from xcheck import __version__
from xcheck.report.bode_figure import DPI, FIGSIZE, bode_axes, write_bode_figure

R, L, C = 0.5, 1e-6, 1e-9
F0 = 1 / (2 * math.pi * math.sqrt(L * C))  # about 5.03 MHz
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
#: Names a fixture may give: mathtext dollars, subscripts, a leading underscore (which
#: matplotlib's legend would otherwise hide).
NAMES = ("series RLC", "R_1 + $L$ larger", "_leading underscore")
#: Two dollars around a command mathtext does not know: drawn as math, this title fails.
HOSTILE_TITLE = r"jig R_1 $\notacommand{$ costs"


def _impedance(f: np.ndarray, r: float = R, l: float = L, c: float = C) -> np.ndarray:
    w = 2 * np.pi * f
    return r + 1j * w * l + 1 / (1j * w * c)


def _sweep() -> tuple[np.ndarray, np.ndarray, list[tuple[str, np.ndarray]]]:
    f = np.logspace(2, 7, 240)
    rng = np.random.default_rng(3)
    measured = _impedance(f) * (1 + rng.normal(0, 0.01, f.size))
    curves = [(NAMES[0], _impedance(f)), (NAMES[1], _impedance(f, l=1.05 * L)),
              (NAMES[2], _impedance(f, r=2 * R))]
    return f, measured, curves


def _write(path):
    f, measured, curves = _sweep()
    return write_bode_figure(path, f, measured, curves, title="invented jig", unit="ohm",
                             resonances=[("f0", F0)])


@pytest.fixture
def draw() -> Iterator[Callable[..., Figure]]:
    """bode_axes, with every figure it made closed afterwards (pytest turns matplotlib's
    too-many-figures warning into an error)."""
    made: list[Figure] = []

    def _draw(*args, **kwargs) -> Figure:
        made.append(bode_axes(*args, **kwargs))
        return made[-1]

    yield _draw
    for figure in made:
        plt.close(figure)


def _line(axis, label: str):
    found = [line for line in axis.get_lines() if line.get_label() == label]
    assert len(found) == 1, (label, [line.get_label() for line in axis.get_lines()])
    return found[0]


def test_the_file_is_a_png_of_the_stated_size_with_the_xcheck_chunk(tmp_path) -> None:
    # A temporary-looking name must still give PNG (the atomic writer uses such names).
    path = _write(tmp_path / ".bode.png.1a2b.tmp")
    assert path.read_bytes()[:8] == PNG_SIGNATURE
    image = matplotlib.image.imread(path, format="png")
    assert image.shape[:2] == (round(FIGSIZE[1] * DPI), round(FIGSIZE[0] * DPI))
    assert np.ptp(image[..., :3]) > 0  # something was drawn, not a blank canvas
    with Image.open(path) as png:
        assert png.format == "PNG"
        assert png.info.get("Software") == f"xcheck {__version__}"
        assert "Creation Time" not in png.info


def test_two_writes_give_identical_bytes(tmp_path) -> None:
    assert _write(tmp_path / "first.png").read_bytes() == _write(
        tmp_path / "second.png").read_bytes()


def test_every_curve_is_in_the_legend_as_named_and_drawn_in_every_panel(draw) -> None:
    f, measured, curves = _sweep()
    figure = draw(f, measured, curves, title="invented jig", unit="ohm")
    magnitude = figure.axes[0]
    legend = [text.get_text() for text in magnitude.get_legend().get_texts()]
    assert legend == ["measured", *NAMES]
    for axis in figure.axes:
        for name in NAMES:
            _line(axis, name)


def test_the_panels_draw_magnitude_phase_and_both_errors(draw) -> None:
    # A model that is the measurement times 1.05 e^{j 10 deg}: the magnitude error is
    # 100 ln 1.05 = 4.879 and the phase error 10 deg at every frequency (complex
    # arithmetic). Tolerance 1e-9: float rounding only.
    f, measured, _ = _sweep()
    model = measured * 1.05 * np.exp(1j * np.deg2rad(10.0))
    figure = draw(f, measured, [("scaled", model)], title="t", unit="ohm")
    magnitude, phase, magnitude_error, phase_error = figure.axes
    np.testing.assert_allclose(_line(magnitude, "scaled").get_ydata(), np.abs(model),
                               rtol=1e-9)
    np.testing.assert_allclose(_line(magnitude, "measured").get_ydata(), np.abs(measured),
                               rtol=1e-9)
    # The series RLC's phase runs from -90 deg (capacitive) to +90 deg (inductive) and
    # the shifted model's from -80 to +100: no wrap, so the line is drawn unbroken.
    np.testing.assert_allclose(_line(phase, "scaled").get_ydata(),
                               np.angle(model, deg=True), rtol=1e-9)
    np.testing.assert_allclose(_line(magnitude_error, "scaled").get_ydata(),
                               100 * math.log(1.05), rtol=1e-9)
    np.testing.assert_allclose(_line(phase_error, "scaled").get_ydata(), 10.0, rtol=1e-9)
    assert magnitude.get_yscale() == "log" and phase_error.get_xscale() == "log"


def test_frequency_ticks_are_in_engineering_units(draw) -> None:
    f, measured, curves = _sweep()
    figure = draw(f, measured, curves, title="t", unit="ohm")
    figure.canvas.draw()
    bottom = figure.axes[-1]
    labels = {tick.get_text() for tick in bottom.get_xticklabels() if tick.get_text()}
    # One tick a decade from 100 Hz to 10 MHz (matplotlib's EngFormatter puts a space
    # between number and prefixed unit).
    assert {"100 Hz", "1 kHz", "10 kHz", "100 kHz", "1 MHz", "10 MHz"} <= labels
    assert "ohm" not in figure.axes[0].get_ylabel() and "|Z|" in figure.axes[0].get_ylabel()


def test_a_transfer_function_reads_h(draw) -> None:
    f, measured, curves = _sweep()
    figure = draw(f, measured / 50.0, [], title="t", unit="V/V")
    assert figure.axes[0].get_ylabel() == "|H| (V/V)"
    assert [t.get_text() for t in figure.axes[0].get_legend().get_texts()] == ["measured"]


def test_a_title_with_dollars_and_underscores_is_drawn_as_written(tmp_path, draw) -> None:
    # The check can fail: matplotlib reads this text as math (an even number of
    # dollars) and its mathtext parser refuses it, so drawing it as math would raise.
    assert matplotlib.cbook.is_math_text(HOSTILE_TITLE)
    with pytest.raises(ValueError):
        matplotlib.mathtext.MathTextParser("path").parse(HOSTILE_TITLE)
    f, measured, curves = _sweep()
    curves = [(HOSTILE_TITLE, curves[0][1])]
    path = write_bode_figure(tmp_path / "bode.png", f, measured, curves,
                             title=HOSTILE_TITLE + "\nsecond line", unit="ohm",
                             resonances=[(HOSTILE_TITLE, F0)])
    assert path.read_bytes()[:8] == PNG_SIGNATURE
    figure = draw(f, measured, curves, title=HOSTILE_TITLE, unit="ohm")
    figure.canvas.draw()  # mathtext is parsed at draw time
    assert figure.axes[0].get_title() == HOSTILE_TITLE
    assert [t.get_text() for t in figure.axes[0].get_legend().get_texts()][1] == HOSTILE_TITLE


def test_text_escaped_for_mathtext_reads_as_the_raw_text(draw) -> None:
    # matplotlib shows an escaped dollar "\\$" in text that is not math as "$"
    # (matplotlib.text.Text._preprocess_math); a caller that escaped its text first
    # (xcheck.report.markdown's figure text) gets the same figure as one that did not.
    f, measured, curves = _sweep()
    escaped = HOSTILE_TITLE.replace("$", "\\$")
    figure = draw(f, measured, [(escaped, curves[0][1])], title=escaped, unit="ohm",
                  resonances=[(escaped, F0)])
    figure.canvas.draw()
    assert figure.axes[0].get_title() == HOSTILE_TITLE
    assert [t.get_text() for t in figure.axes[0].get_legend().get_texts()][1] == HOSTILE_TITLE
    assert f" {HOSTILE_TITLE} " in [text.get_text() for text in figure.axes[0].texts]


def test_non_finite_model_values_are_gaps(tmp_path, draw) -> None:
    f, measured, curves = _sweep()
    bad = curves[0][1].copy()
    bad[10], bad[20], bad[30] = np.inf, np.nan, complex(np.inf, -np.inf)
    curves = [("bad", bad)]
    assert write_bode_figure(tmp_path / "bode.png", f, measured, curves, title="t",
                             unit="ohm").read_bytes()[:8] == PNG_SIGNATURE
    figure = draw(f, measured, curves, title="t", unit="ohm")
    figure.canvas.draw()
    for axis in figure.axes:
        y = np.asarray(_line(axis, "bad").get_ydata(), float)
        assert np.isnan(y[[10, 20, 30]]).all()
        assert np.isfinite(np.delete(y, [10, 20, 30])).all()


def test_resonances_in_the_sweep_are_dotted_lines_in_every_panel(draw) -> None:
    f, measured, curves = _sweep()
    figure = draw(f, measured, curves, title="t", unit="ohm",
                  resonances=[("measured f0", F0), ("beyond the sweep", 1e9),
                              ("not a number", math.nan)])
    for axis in figure.axes:
        marks = [line for line in axis.get_lines() if line.get_label().startswith("resonance")]
        assert [line.get_label() for line in marks] == ["resonance: measured f0"]
        assert np.allclose(marks[0].get_xdata(), F0) and marks[0].get_linestyle() == ":"
    assert any(" measured f0 " == text.get_text() for text in figure.axes[0].texts)


def test_a_curve_of_the_wrong_length_is_refused(draw) -> None:
    f, measured, _ = _sweep()
    with pytest.raises(ValueError, match="shape"):
        draw(f, measured, [("short", measured[:-1])], title="t", unit="ohm")
