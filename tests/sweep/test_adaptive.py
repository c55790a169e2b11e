"""JCGM 101's adaptive Monte Carlo procedure (section 7.9).

References: the numerical-tolerance rule of JCGM 101:2008 section 7.9.2 and the batch
rule of 7.9.4 (from memory), worked by hand for the examples below; the additive model
of section 9.2.2 (from memory): Y = X1 + X2 + X3 + X4 with independent standard normal
inputs has u(y) = 2 and the 95 % coverage interval +/- 1.96 x 2 = +/- 3.92 (the sum of
independent normals is normal with the variances added).
"""

from __future__ import annotations

import numpy as np
import pytest

from xcheck.sweep.adaptive import AdaptiveRun, batch_size, numerical_tolerance


@pytest.mark.parametrize("u, digits, delta", [
    (0.0165, 2, 0.0005),   # 17 x 10^-3 -> half of 10^-3
    (2.0, 2, 0.05),        # 20 x 10^-1
    (99.7, 2, 5.0),        # rounds to 100 = 10 x 10^1 -> half of 10
    (0.35, 1, 0.05),       # 4 x 10^-1 (0.35 rounds to 0.4 with one digit)
    (4.2e3, 1, 500.0),     # 4 x 10^3
])
def test_numerical_tolerance(u: float, digits: int, delta: float) -> None:
    assert numerical_tolerance(u, digits) == pytest.approx(delta, rel=1e-12)


def test_batch_size() -> None:
    # h = max(J, 10^4), J >= 100 / (1 - p): 10^4 for p = 0.95, 10^5 for p = 0.999.
    assert batch_size(0.95) == 10_000
    assert batch_size(0.999) == 100_000


def test_the_additive_model_of_section_9_2_2() -> None:
    run = AdaptiveRun(("y",), coverage=0.95, digits=2)
    seeds = np.random.SeedSequence(101)
    h = batch_size(0.95)
    while not run.done():
        assert run.count < 200, "the procedure should settle within a few batches"
        rng = np.random.default_rng(seeds.spawn(1)[0])
        run.add({"y": rng.standard_normal((h, 4)).sum(axis=1)})
    values = run.all_values("y")
    u = values.std(ddof=1)
    low, high = np.quantile(values, [0.025, 0.975])
    delta = run.tolerance("y")
    assert delta == pytest.approx(0.05)  # u = 2.0 with two digits
    # The procedure promises each watched number to about delta (twice the standard
    # deviation of its batch means is below delta); the tolerances are delta.
    assert abs(u - 2.0) <= delta
    assert abs(low + 3.92) <= delta and abs(high - 3.92) <= delta
    assert abs(values.mean()) <= delta
    assert run.count >= 2


def test_a_constant_output_is_stable_at_once() -> None:
    run = AdaptiveRun(("y",))
    run.add({"y": np.ones(100)})
    assert not run.done()  # never before the second batch
    run.add({"y": np.ones(100)})
    assert run.done()


def test_a_noisy_output_is_not_stable_after_two_small_batches() -> None:
    run = AdaptiveRun(("y",), digits=2)
    rng = np.random.default_rng(3)
    for _ in range(2):
        run.add({"y": rng.standard_normal(50)})
    assert not run.done()
