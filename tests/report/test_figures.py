"""Every figure function in xcheck.report.figures writes a readable, byte-stable PNG.

References: matplotlib.image.imread (through Pillow) reads each file back and gives its
size in pixels, which is the figure size in inches times the dots per inch (matplotlib's
documented ``figsize`` and ``dpi``); Pillow reads the PNG text chunks. The PNG signature
``89 50 4E 47 0D 0A 1A 0A`` is from the PNG specification (from memory). Inputs are
invented, seeded ring-downs: V0 exp(-alpha t) cos(omega_d t).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import matplotlib.image
import numpy as np
import pytest
from PIL import Image

from xcheck import __version__
from xcheck.engines.predict import Prediction
from xcheck.engines.waveform import Waveform
from xcheck.report.figures import (
    envelope_figure,
    overlay_figure,
    prediction_figure,
    residual_figure,
    ringdown_figure,
)
from xcheck.ringdown import estimate_from_peaks, estimate_ringdown

ALPHA, FREQ, V0 = 800.0, 2.0e3, 5.0
OMEGA = 2 * math.pi * FREQ
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _ringing(t: np.ndarray) -> np.ndarray:
    return V0 * np.exp(-ALPHA * t) * np.cos(OMEGA * t)


def _trace() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(7)
    t = np.arange(-200, 4000) * (1 / FREQ / 50)
    v = np.where(t < 0, 0.0, _ringing(np.clip(t, 0, None))) + rng.normal(0, 0.01, t.size)
    return t, v


def _overlay(path: Path) -> Path:
    t, v = _trace()
    return overlay_figure(path, t, v, [("a", _ringing(t)), ("b", 0.9 * _ringing(t))], "title")


def _residuals(path: Path) -> Path:
    t, v = _trace()
    return residual_figure(path, t, [("a", v - _ringing(t)), ("b", v)], 0.01)


def _envelope(path: Path) -> Path:
    k = np.arange(12)
    times = k * math.pi / OMEGA
    amplitudes = V0 * np.exp(-ALPHA * times)
    return envelope_figure(path, times, amplitudes, [3], ALPHA, V0)


def _ringdown_trace(path: Path) -> Path:
    t, v = _trace()
    keep = t >= 0
    excluded = np.zeros(int(keep.sum()), bool)
    excluded[:5] = True
    estimate = estimate_ringdown(t[keep], v[keep], noise_sigma=0.01, exclude=excluded)
    return ringdown_figure(path, estimate, t[keep], v[keep], excluded, title="trace.csv")


def _ringdown_peaks(path: Path) -> Path:
    k = np.arange(10)
    tk = k * math.pi / OMEGA
    vk = V0 * (-1.0) ** k * np.exp(-ALPHA * tk)
    estimate = estimate_from_peaks(tk, vk, np.full(k.size, 0.005))
    return ringdown_figure(path, estimate, tk, vk, None, title="cursor.csv")


def _prediction(with_theory: bool) -> Callable[[Path], Path]:
    t = np.linspace(0, 5e-3, 800)
    spice = Waveform(t, _ringing(t), engine="ngspice")
    theory = Waveform(t, _ringing(t) + 1e-4, engine="theory") if with_theory else None
    prediction = Prediction(spice, theory, None, "" if with_theory else "not reducible", V0)
    return lambda path: prediction_figure(path, prediction, "invented loop")


# (name, draw, expected (height, width) in pixels: figsize in inches times dpi)
CASES = [
    ("overlay", _overlay, (round(4.2 * 110), 8 * 110)),
    # residual_figure: 1.6 + 1.3 per panel inches high, two panels here
    ("residuals", _residuals, (round((1.6 + 1.3 * 2) * 110), 8 * 110)),
    ("envelope", _envelope, (round(3.8 * 110), 8 * 110)),
    ("ringdown trace", _ringdown_trace, (round(6.4 * 110), 8 * 110)),
    ("ringdown peaks", _ringdown_peaks, (round(6.4 * 110), 8 * 110)),
    ("prediction", _prediction(True), (round(5.5 * 120), 8 * 120)),
    ("prediction, ngspice only", _prediction(False), (4 * 120, 8 * 120)),
]


@pytest.mark.parametrize(("name", "draw", "size"), CASES, ids=[c[0] for c in CASES])
def test_figure_is_a_readable_png_of_the_expected_size(tmp_path, name, draw, size) -> None:
    path = draw(tmp_path / "figure.png")
    image = matplotlib.image.imread(path)
    assert image.ndim == 3 and image.shape[:2] == size, name
    assert np.ptp(image[..., :3]) > 0  # something was drawn, not a blank canvas


@pytest.mark.parametrize(("name", "draw", "size"), CASES, ids=[c[0] for c in CASES])
def test_two_writes_are_byte_identical(tmp_path, name, draw, size) -> None:
    first = draw(tmp_path / "first.png").read_bytes()
    second = draw(tmp_path / "second.png").read_bytes()
    assert first == second, name


@pytest.mark.parametrize(("name", "draw", "size"), CASES, ids=[c[0] for c in CASES])
def test_png_carries_the_xcheck_software_chunk_whatever_its_name(tmp_path, name, draw,
                                                                 size) -> None:
    # A temporary name (as the atomic writer uses) must still give PNG, not guess from it.
    path = draw(tmp_path / ".figure.png.1a2b.tmp")
    assert path.read_bytes()[:8] == PNG_SIGNATURE
    with Image.open(path) as image:  # Pillow reads the text chunks
        assert image.format == "PNG"
        assert image.info.get("Software") == f"xcheck {__version__}", name
        assert "Creation Time" not in image.info
