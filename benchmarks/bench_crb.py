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

Run: ``python -m benchmarks.bench_crb [--trials 300] [--json FILE]`` (or all benchmarks:
``python -m benchmarks``).
"""

from __future__ import annotations

import argparse
import json
import math
import time
from dataclasses import dataclass

import numpy as np

from benchmarks.table import INFO, Row, judged
from xcheck.errors import TraceError
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
    """Monte Carlo of one scenario at one SNR; returns the measured figures.

    A trial the estimator refuses (a TraceError, e.g. fewer than about 1.5 periods of
    ringing above the noise) is counted in ``refused`` and left out of the figures;
    when every trial is refused the ratios are NaN.
    """
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
    flagged = not_exponential = refused = 0
    start = time.perf_counter()
    for _ in range(trials):
        try:
            result = estimate_ringdown(t, clean + rng.normal(0.0, sigma, t.size), noise_sigma=sigma)
        except TraceError:
            refused += 1
            continue
        alphas.append(result.neper_frequency.value)
        freqs.append(result.damped_frequency.value)
        se_alpha.append(result.neper_frequency.stderr)
        se_freq.append(result.damped_frequency.stderr)
        flagged += bool(result.flagged_extrema)
        not_exponential += not result.envelope_exponential
    elapsed = time.perf_counter() - start
    accepted = trials - refused
    if accepted == 0:
        nan = float("nan")
        return {"snr_db": snr_db, "trials": trials, "refused": refused, "ratio_alpha": nan,
                "ratio_freq": nan, "stderr_over_rmse_alpha": nan, "stderr_over_rmse_freq": nan,
                "trials_with_flags": nan, "ms_per_estimate": 1e3 * elapsed / trials}
    alphas_arr, freqs_arr = np.array(alphas), np.array(freqs)
    rmse_alpha = float(np.sqrt(np.mean((alphas_arr - scenario.alpha) ** 2)))
    rmse_freq = float(np.sqrt(np.mean((freqs_arr - scenario.freq) ** 2)))
    return {
        "snr_db": snr_db,
        "trials": trials,
        "refused": refused,
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
        "trials_with_flags": flagged / accepted,
        "trials_not_exponential": not_exponential / accepted,
        "ms_per_estimate": 1e3 * elapsed / trials,
    }


#: SNRs of the table (dB) and those at which the RMSE goal applies.
SNRS_DB = (40.0, 20.0, 10.0)
GOAL_SNRS_DB = (40.0, 20.0)
RATIO_GOAL = 1.1
SE_GOAL = (0.9, 1.2)


def _seed(seed: int, k: int, snr_db: float) -> int:
    """The seed of scenario ``k`` at ``snr_db`` (the 40 and 20 dB seeds as in earlier runs)."""
    return seed + 100 * k + {40.0: 0, 20.0: 1}.get(snr_db, 2)


def rows(trials: int = 300, seed: int = 20240) -> list[Row]:
    """Table rows: RMSE / sqrt(CRB) and SE / RMSE per SNR, refusals per scenario.

    Parameters
    ----------
    trials
        Seeded trials per scenario and SNR.
    seed
        Base seed.

    Returns
    -------
    list of Row
        Per SNR (40, 20, 10 dB): the worst RMSE / sqrt(CRB) of alpha and of f_d over the
        scenarios, and the range of SE / RMSE; then one row of refusals per scenario.
    """
    results = {
        (k, snr): run(scenario, snr, trials, _seed(seed, k, snr))
        for k, scenario in enumerate(SCENARIOS)
        for snr in SNRS_DB
    }
    out: list[Row] = []
    for snr in SNRS_DB:
        per = [results[(k, snr)] for k in range(len(SCENARIOS))]
        for name, field in (("alpha", "ratio_alpha"), ("f_d", "ratio_freq")):
            values = [r[field] for r in per]
            worst = max(values) if all(math.isfinite(v) for v in values) else float("nan")
            detail = ", ".join(f"{s.name}: {v:.3f}" for s, v in zip(SCENARIOS, values))
            has_goal = snr in GOAL_SNRS_DB
            status = judged(worst <= RATIO_GOAL) if has_goal else INFO
            note = f"worst of 3 scenarios, {trials} trials each ({detail}); RMSE known to about +-4 % at 300 trials"
            if status == "missed":
                note += "; likely reason: estimator not efficient at this SNR or Monte Carlo scatter"
            out.append(Row(
                f"b-{name}-{snr:.0f}dB", f"ring-down {name} RMSE at SNR {snr:.0f} dB",
                f"<= {RATIO_GOAL}" if has_goal else "none (reported)",
                "sqrt(Cramer-Rao bound), same model and sample times",
                f"{worst:.3f}", status, note,
            ))
        ses = [r[f] for r in per for f in ("stderr_over_rmse_alpha", "stderr_over_rmse_freq")]
        finite = [v for v in ses if math.isfinite(v)]
        low, high = (min(finite), max(finite)) if finite else (float("nan"), float("nan"))
        ok = bool(finite) and SE_GOAL[0] <= low and high <= SE_GOAL[1]
        out.append(Row(
            f"b-se-{snr:.0f}dB", f"ring-down reported SE at SNR {snr:.0f} dB (alpha and f_d)",
            f"{SE_GOAL[0]}-{SE_GOAL[1]}", "Monte Carlo RMSE of the same trials",
            f"{low:.3f}-{high:.3f}", judged(ok),
            f"range over 3 scenarios x 2 parameters, {trials} trials each"
            + ("" if ok else "; likely reason: the linearised standard error is off when the "
               "noise is large against the ringing (few periods above the noise)"),
        ))
    for k, scenario in enumerate(SCENARIOS):
        counts = [results[(k, snr)]["refused"] for snr in SNRS_DB]
        detail = ", ".join(f"{snr:.0f} dB: {c}" for snr, c in zip(SNRS_DB, counts))
        out.append(Row(
            f"b-refused-{k + 1}", f"ring-down refusals, {scenario.name} ({scenario.samples} samples)",
            "none (reported)", f"{trials} trials per SNR", f"{sum(counts)}/{trials * len(SNRS_DB)}",
            INFO, f"TraceError ('fewer than about 1.5 periods above the noise' and the like) per SNR: {detail}",
        ))
    return out


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
        for snr in SNRS_DB:
            row = run(scenario, snr, args.trials, _seed(args.seed, k, snr))
            row["scenario"] = scenario.name
            results.append(row)
            print(
                f"{scenario.name:26} {snr:5.0f} "
                f"{row['ratio_alpha']:15.3f} {row['ratio_freq']:15.3f} "
                f"{row['stderr_over_rmse_alpha']:9.3f} {row['stderr_over_rmse_freq']:9.3f} "
                f"{row['trials_with_flags']:7.3f} {row['ms_per_estimate']:6.1f}"
                + (f"  refused {row['refused']}" if row["refused"] else "")
            )
    worst = max(max(r["ratio_alpha"], r["ratio_freq"]) for r in results if r["snr_db"] in GOAL_SNRS_DB)
    print(f"worst RMSE / sqrt(CRB) at 40 and 20 dB: {worst:.3f} (target <= 1.2, goal 1.1)")
    if args.json:
        with open(args.json, "w", encoding="utf-8") as handle:
            json.dump(results, handle, indent=2)


if __name__ == "__main__":
    main()
