"""The Monte Carlo over tolerances: reproducible, and right against first-order theory.

References: JCGM 100:2008 (the GUM) section 5.1.2, the law of propagation of
uncertainty u(f) = |df/dC| u(C) (from memory); the damped frequency of a series RLC,
omega_d^2 = 1 / (L C) - R^2 / (4 L^2) (standard circuit theory, from memory),
differentiated by hand: d omega_d / dC = -1 / (2 omega_d L C^2); numpy's SeedSequence
for the seed tree; xcheck.engines.exact.dominant_ring for the batched ring.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from compare_cases import data_text, variant
from xcheck.engines.exact import ExactEngine, dominant_ring
from xcheck.fitting.candidates import default_ladder
from xcheck.fixture.reader import parse_fixture_text
from xcheck.sweep import montecarlo
from xcheck.sweep.montecarlo import Grid, run_montecarlo
from xcheck.sweep.trials import batched_ring, build_plan, chunk_seed

R, L, C = 1.3, 220e-6, 10e-6  # tests/data/series_rlc.toml (invented)


class SerialExecutor:
    """A stand-in executor: every task here, in order (the interface of
    xcheck.sweep.executors)."""

    def __init__(self, workers: int = 1, reverse: bool = False) -> None:
        self.workers = workers
        self.reverse = reverse

    def map(self, function, tasks, progress=None):
        order = list(range(len(tasks)))[::-1] if self.reverse else range(len(tasks))
        results = [None] * len(tasks)
        for done, index in enumerate(order, 1):
            results[index] = function(tasks[index])
            if progress is not None:
                progress(done, len(tasks))
        return results


def rlc(c_tolerance: str = "10%", l_tolerance: str | None = "20%", extra: str = ""):
    edits = [('nominal = "10u"', f'nominal = "10u"\ntolerance = "{c_tolerance}"')]
    if l_tolerance:
        edits.append(('nominal = "220u"', f'nominal = "220u"\ntolerance = "{l_tolerance}"'))
    return parse_fixture_text(variant(data_text("series_rlc.toml"), *edits) + extra, "rlc.toml")


def label(fixture):
    return [c for c in default_ladder(fixture) if c.name == "label"]


GRID = Grid(np.linspace(0.0, 2e-3, 301))


def test_chunk_seeds_are_spawned_children() -> None:
    # Reference: numpy's SeedSequence.spawn, taken twice (candidate, then chunk).
    spawned = np.random.SeedSequence(99).spawn(2)[1].spawn(4)[3]
    assert np.array_equal(chunk_seed(99, 1, 3).generate_state(8), spawned.generate_state(8))


def test_the_batched_ring_is_dominant_ring_row_by_row() -> None:
    fixture = rlc()
    plan = build_plan(fixture, label(fixture)[0], 0, GRID.times)
    engine = ExactEngine(plan.circuit)
    factors = plan.model.draw(np.random.default_rng(5), 6)
    values, initials = plan.element_values(factors)
    omega, alpha = batched_ring(engine, engine.model(values, initials))
    for row in range(6):
        one = dominant_ring(engine, engine.model(values[row:row + 1], initials[row:row + 1]))
        # Same eigenvalues, one LAPACK call per matrix either way: equal to rounding.
        assert omega[row] == pytest.approx(one[0], rel=1e-12)
        assert alpha[row] == pytest.approx(one[1], rel=1e-12)


def test_the_same_seed_gives_the_same_numbers_in_any_layout() -> None:
    fixture = rlc()
    runs = dict(seed=1234, runs=4500)  # five chunks, the last one partial
    one = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), chunks_per_task=1,
                         **runs).candidates[0]
    three = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(3, reverse=True),
                           chunks_per_task=3, **runs).candidates[0]
    assert one.trials == three.trials == 4500
    # Exactly equal: each chunk is drawn and evaluated alone.
    assert one.frequency == three.frequency and one.alpha == three.alpha
    assert np.array_equal(one.band.low, three.band.low)
    assert np.array_equal(one.band.high, three.band.high)
    other = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=1235,
                           runs=4500).candidates[0]
    assert other.frequency.mean != one.frequency.mean  # the seed matters


def test_the_local_pool_gives_the_serial_numbers() -> None:
    from xcheck.sweep.executors import open_executor

    fixture = rlc()
    serial = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=8,
                            runs=3000).candidates[0]
    with open_executor(workers=2) as executor:
        pooled = run_montecarlo(fixture, label(fixture), GRID, executor, seed=8,
                                runs=3000).candidates[0]
    assert pooled.frequency == serial.frequency
    assert np.array_equal(pooled.band.median, serial.band.median)


def test_the_spread_of_f_d_matches_first_order_propagation() -> None:
    fixture = rlc("2%", None)  # C1 alone varies, uniform, half-width 2 %
    runs = 20_000
    sweep = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=77,
                           runs=runs).candidates[0]
    assert [v.label for v in sweep.varied] == ["C1.value"]
    omega_d = math.sqrt(1 / (L * C) - R**2 / (4 * L**2))
    u_c = 0.02 * C / math.sqrt(3)  # JCGM 100 4.3.7: a half-width a gives a / sqrt(3)
    u_f = abs(-1 / (2 * omega_d * L * C**2)) * u_c / (2 * math.pi)  # JCGM 100 5.1.2
    assert sweep.nominal_frequency == pytest.approx(omega_d / (2 * math.pi), rel=1e-10)
    # Sampling error of a standard deviation: sd(s) / sigma = sqrt((kurtosis - 1) / (4 N))
    # (from memory); a uniform input keeps f_d's kurtosis near 1.8, so 0.0032 for
    # N = 2 x 10^4. The first-order truncation is of order t^2 = 4e-4. Tolerance: four
    # sampling errors.
    sampling = math.sqrt(0.8 / (4 * runs))
    assert sweep.frequency.std == pytest.approx(u_f, rel=4 * sampling)
    assert sweep.frequency.mean == pytest.approx(omega_d / (2 * math.pi),
                                                 abs=4 * u_f / math.sqrt(runs) + 1e-3 * u_f)


def test_every_corner_is_evaluated_up_to_ten_values(monkeypatch) -> None:
    fixture = rlc()
    sweep = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=3,
                           runs=50).candidates[0]
    corners = sweep.corners
    assert corners.method == "all" and corners.count == 4
    # f = 1 / (2 pi sqrt(L C)) (from memory, light damping): lowest with both high.
    assert corners.frequency_low.factors == (1.1, 1.2)
    assert corners.frequency_high.factors == pytest.approx((0.9, 0.8))
    # alpha = R / (2 L) (from memory): L alone sets it, lowest at L high.
    assert corners.alpha_low.factors[1] == pytest.approx(1.2)
    # Beyond the limit the first-order ranking picks the same extremes.
    monkeypatch.setattr(montecarlo, "MAX_CORNER_VALUES", 1)
    ranked = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=3,
                            runs=50).candidates[0].corners
    assert ranked.method == "first-order" and ranked.count == 4
    assert ranked.frequency_low.frequency == pytest.approx(corners.frequency_low.frequency,
                                                           rel=1e-12)
    assert ranked.alpha_high.alpha == pytest.approx(corners.alpha_high.alpha, rel=1e-12)


def test_the_band_holds_the_curves_and_counts_the_measurement() -> None:
    fixture = rlc()
    plan_fixture = label(fixture)
    nominal = run_montecarlo(fixture, plan_fixture, GRID, SerialExecutor(), seed=4,
                             runs=2000).candidates[0].band.nominal
    grid = Grid(GRID.times, nominal + np.where(GRID.times > 1e-3, 50.0, 0.0))
    band = run_montecarlo(fixture, plan_fixture, grid, SerialExecutor(), seed=4,
                          runs=2000).candidates[0].band
    assert np.all(band.low <= band.median) and np.all(band.median <= band.high)
    # The stated-value curve lies inside its own band wherever it was not moved by
    # 50 V; the share inside is then the share of points before 1 ms (or fewer).
    before = float(np.mean(GRID.times <= 1e-3))
    assert 0.5 * before < band.inside <= before


def test_the_adaptive_procedure_stops_when_stable() -> None:
    fixture = rlc("1%", None)
    sweep = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=12,
                           digits=1).candidates[0]
    record = sweep.adaptive
    assert record.converged and record.batches >= 2
    assert sweep.trials == record.batches * record.batch
    assert record.batch == 10_000  # JCGM 101 7.9.4: max(100 / 0.1, 10^4) for p = 0.9
    assert sweep.band.trials == 10_000


def test_nothing_to_vary_is_no_trial() -> None:
    fixture = parse_fixture_text(data_text("series_rlc.toml"), "rlc.toml")
    sweep = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), seed=1,
                           runs=100).candidates[0]
    assert sweep.trials == 0 and sweep.corners is None and sweep.band.inside is None
    assert np.array_equal(sweep.band.low, sweep.band.nominal)


def test_a_dask_cluster_gives_the_pool_and_serial_numbers(dask_address) -> None:
    # Acceptance of the sweep: the same seed gives the same numbers whatever the executor
    # (a LocalCluster of two processes on loopback, a two-process pool, one worker here).
    from xcheck.sweep.executors import open_executor

    fixture = rlc()
    runs = dict(seed=21, runs=2500)
    serial = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(),
                            **runs).candidates[0]
    with open_executor(workers=2) as executor:
        pooled = run_montecarlo(fixture, label(fixture), GRID, executor, **runs).candidates[0]
    with open_executor(cluster=dask_address) as executor:
        clustered = run_montecarlo(fixture, label(fixture), GRID, executor,
                                   **runs).candidates[0]
    for other in (pooled, clustered):
        # Exactly equal: each chunk is drawn from its own seed and evaluated alone.
        assert other.frequency == serial.frequency and other.alpha == serial.alpha
        assert np.array_equal(other.band.low, serial.band.low)
        assert np.array_equal(other.band.high, serial.band.high)


@pytest.mark.ngspice
def test_ngspice_trials_agree_with_the_exact_engine() -> None:
    # Each ngspice trial is the same circuit the exact engine evaluates, on the same
    # draws: f_d and alpha agree per trial to the deck's accuracy target (1e-4 of the
    # response, xcheck.engines.timing); their means and spreads to well within 1e-3.
    fixture = rlc()
    runs = dict(seed=5, runs=12)
    exact = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(),
                           **runs).candidates[0]
    spice = run_montecarlo(fixture, label(fixture), GRID, SerialExecutor(), engine="ngspice",
                           **runs).candidates[0]
    assert spice.trials == exact.trials == 12
    assert spice.frequency.mean == pytest.approx(exact.frequency.mean, rel=1e-3)
    assert spice.alpha.mean == pytest.approx(exact.alpha.mean, rel=1e-3)
    assert spice.frequency.std == pytest.approx(exact.frequency.std, rel=2e-2)
    scale = float(np.max(np.abs(exact.band.nominal)))
    assert np.max(np.abs(spice.band.median - exact.band.median)) < 1e-3 * scale
