"""How close does the ring-down estimator come to the Cramér-Rao bound?

Seeded Monte Carlo: synthetic ring-downs ``A exp(-alpha t) cos(2 pi f_d t + phi) + c``
in white Gaussian noise, estimated by :func:`xcheck.ringdown.estimate_ringdown`; the
root-mean-square error of alpha and f_d over the trials is divided by the square root of
the Cramér-Rao bound of the same model at the true parameters (Kay, Fundamentals of
Statistical Signal Processing, vol. 1, 1993, eq. 3.31: Fisher information J^T J / sigma^2).
Target: ratio <= 1.2 (goal 1.1). With 300 trials the RMSE itself is known to about
+-4 % (relative standard deviation 1/sqrt(2 x 300)), so ratios within ~1.00 +- 0.08 are
"at the bound".

SNR is the initial ringing power over the noise variance, ``A^2 / (2 sigma^2)``.

Run: ``python benchmarks/bench_crb.py [--trials 300] [--json FILE]``.
"""

from __future__ import annotations

import argparse
import json
import math
import time
from dataclasses import dataclass

import numpy as np

from xcheck.ringdown import estimate_ringdown
from xcheck.ringdown.crb import damped_sinusoid_crb


@dataclass(frozen=True)
class Scenario:
    """One synthetic ring-down (invented numbers)."""

    name: str
    sample_rate: float
    samples: int
    alpha: float
    freq: float
    amplitude: float = 1.0
    phase: float = 0.4
    offset: float = 0.05


SCENARIOS = (
    Scenario("Q~16, 50 samples/period", 1e6, 1000, 4.0e3, 2.0e4),
    Scenario("Q~3, 20 samples/period", 1e6, 400, 2.0e4, 5.0e4),
    Scenario("Q~40, 12 samples/period", 1e6, 3000, 1.0e3, 8.0e4),
)


def run(scenario: Scenario, snr_db: float, trials: int, seed: int) -> dict[str, float]:
    """Monte Carlo of one scenario at one SNR; returns the measured figures."""
    t = np.arange(scenario.samples) / scenario.sample_rate
    omega = 2.0 * math.pi * scenario.freq
    a = scenario.amplitude * math.cos(scenario.phase)
    b = -scenario.amplitude * math.sin(scenario.phase)
    theta = np.array([scenario.alpha, omega, a, b, scenario.offset])
    clean = (
        np.exp(-scenario.alpha * t) * (a * np.cos(omega * t) + b * np.sin(omega * t))
        + scenario.offset
    )
    sigma = scenario.amplitude / math.sqrt(2.0 * 10.0 ** (snr_db / 10.0))
    bound = damped_sinusoid_crb(t, theta, sigma)
    crb_alpha = math.sqrt(bound[0, 0])
    crb_freq = math.sqrt(bound[1, 1]) / (2.0 * math.pi)
    rng = np.random.default_rng(seed)
    alphas, freqs, se_alpha, se_freq = [], [], [], []
    flagged = not_exponential = 0
    start = time.perf_counter()
    for _ in range(trials):
        result = estimate_ringdown(t, clean + rng.normal(0.0, sigma, t.size), noise_sigma=sigma)
        alphas.append(result.neper_frequency.value)
        freqs.append(result.damped_frequency.value)
        se_alpha.append(result.neper_frequency.stderr)
        se_freq.append(result.damped_frequency.stderr)
        flagged += bool(result.flagged_extrema)
        not_exponential += not result.envelope_exponential
    elapsed = time.perf_counter() - start
    alphas_arr, freqs_arr = np.array(alphas), np.array(freqs)
    rmse_alpha = float(np.sqrt(np.mean((alphas_arr - scenario.alpha) ** 2)))
    rmse_freq = float(np.sqrt(np.mean((freqs_arr - scenario.freq) ** 2)))
    return {
        "snr_db": snr_db,
        "trials": trials,
        "rmse_alpha_per_s": rmse_alpha,
        "crb_alpha_per_s": crb_alpha,
        "ratio_alpha": rmse_alpha / crb_alpha,
        "rmse_freq_hz": rmse_freq,
        "crb_freq_hz": crb_freq,
        "ratio_freq": rmse_freq / crb_freq,
        "bias_alpha_in_crb": float(np.mean(alphas_arr) - scenario.alpha) / crb_alpha,
        "bias_freq_in_crb": float(np.mean(freqs_arr) - scenario.freq) / crb_freq,
        "stderr_over_rmse_alpha": float(np.mean(se_alpha)) / rmse_alpha,
        "stderr_over_rmse_freq": float(np.mean(se_freq)) / rmse_freq,
        "trials_with_flags": flagged / trials,
        "trials_not_exponential": not_exponential / trials,
        "ms_per_estimate": 1e3 * elapsed / trials,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=300)
    parser.add_argument("--seed", type=int, default=20240)
    parser.add_argument("--json", default=None, help="write the results here")
    args = parser.parse_args()
    results = []
    header = (
        f"{'scenario':26} {'SNR':>5} {'RMSE/sqrtCRB a':>15} {'RMSE/sqrtCRB f':>15} "
        f"{'se/RMSE a':>9} {'se/RMSE f':>9} {'flagged':>7} {'ms':>6}"
    )
    print(header)
    for k, scenario in enumerate(SCENARIOS):
        for j, snr in enumerate((40.0, 20.0)):
            row = run(scenario, snr, args.trials, args.seed + 100 * k + j)
            row["scenario"] = scenario.name
            results.append(row)
            print(
                f"{scenario.name:26} {snr:5.0f} "
                f"{row['ratio_alpha']:15.3f} {row['ratio_freq']:15.3f} "
                f"{row['stderr_over_rmse_alpha']:9.3f} {row['stderr_over_rmse_freq']:9.3f} "
                f"{row['trials_with_flags']:7.3f} {row['ms_per_estimate']:6.1f}"
            )
    worst = max(max(r["ratio_alpha"], r["ratio_freq"]) for r in results)
    print(f"worst RMSE / sqrt(CRB): {worst:.3f} (target <= 1.2, goal 1.1)")
    if args.json:
        with open(args.json, "w", encoding="utf-8") as handle:
            json.dump(results, handle, indent=2)


if __name__ == "__main__":
    main()
