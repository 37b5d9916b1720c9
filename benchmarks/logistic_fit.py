"""Benchmark: survey-weighted logistic fit (Newton + linearised design variance).

Run as a plain script, not a test:

    python benchmarks/logistic_fit.py [--rows 300000 1000000] [--no-r] [--seed N]

For each size it simulates a stratified cluster design (30 strata, 2-4 clusters each, unequal
weights, a random cluster effect on the outcome) with an 8-term design matrix (intercept and
7 covariates, two of them 0/1 indicators), builds the Design with `make_design` and times
`cohortstone.models.logistic.fit` (coefficients *and* the design covariance): best of
`--repeats` wall-clock runs. Peak additional memory during one fit is measured with
tracemalloc (numpy registers its buffers there) and shown as a multiple of `x.nbytes`.

When Rscript and its `survey` package are available (and `--no-r` is not given) the same data
is written as raw little-endian doubles, read back in R with base `readBin`, and R's
`svyglm(family = quasibinomial())` is fitted to it in the same run; only the `svyglm` call is
timed (`system.time`), with `glm.control(epsilon = 1e-14)` so that both programs stop at a
comparably tight convergence (with R's default 1e-8 it stops one iteration earlier here and
its SEs, computed with the previous iterate's weights, agree only to about 1e-7; R then
takes a little less time). R is a reference for speed and for the numbers, nothing more:
the maximum relative differences of coefficients and standard errors are printed.

Targets (printed as PASS/MISS, figures only; the script exits 0 unless it crashes):
  * 1,000,000 rows fitted in <= 1.5 s (on 2 cores),
  * >= 5x faster than R's svyglm,
  * peak additional memory <= 3x the design matrix.
"""
from __future__ import annotations

import argparse
import gc
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from common import R_READ_MATRIX, mark, peak_bytes, preamble, run_r_on_matrix

from cohortstone.config.spec import DesignSpec
from cohortstone.design import make_design
from cohortstone.models.logistic import fit

N_STRATA = 30
TARGET_ROWS = 1_000_000
TARGET_SECONDS = 1.5
TARGET_SPEEDUP = 5.0
TARGET_MEMORY = 3.0

NAMES = ["(intercept)", "age_per10", "male", "bmi", "water_l_day", "diabetes",
         "income_ratio", "sodium_g"]
COVARIATES = NAMES[1:]
# Simulation truth on the log-odds scale (invented values, all clearly non-zero).
TRUE_BETA = np.array([-4.2, 0.22, 0.45, 0.036, -0.30, 0.40, -0.09, 0.12])
CLUSTER_SD = 0.35


@dataclass
class Data:
    frame: pd.DataFrame      # weight, strata, psu, covariates, y (what R receives too)
    x: np.ndarray            # n x 8, float64, C order, intercept first
    y: np.ndarray
    w: np.ndarray


def simulate(n: int, rng: np.random.Generator) -> Data:
    """Stratified two-stage-like sample: 30 strata, 2-4 PSUs each, unequal sizes and weights."""
    per_stratum = rng.integers(2, 5, size=N_STRATA)               # 2..4 clusters
    cluster_stratum = np.repeat(np.arange(N_STRATA), per_stratum)
    local_id = np.concatenate([np.arange(1, k + 1) for k in per_stratum])
    n_clusters = len(cluster_stratum)
    size_share = rng.dirichlet(np.full(n_clusters, 4.0))          # unequal cluster sizes
    cluster = rng.choice(n_clusters, size=n, p=size_share)
    stratum = cluster_stratum[cluster]

    # Unequal weights: stratum sampling rates times person-level non-response adjustment.
    stratum_base = rng.uniform(80.0, 900.0, size=N_STRATA)
    weight = stratum_base[stratum] * rng.lognormal(0.0, 0.45, size=n)

    cluster_shift = rng.normal(0.0, 1.0, size=n_clusters)         # covariates vary by cluster
    age = rng.uniform(20.0, 80.0, size=n)
    male = (rng.random(n) < 0.49).astype(float)
    bmi = rng.normal(28.0 + 0.8 * cluster_shift[cluster], 5.5)
    water = rng.gamma(2.5, 0.55, size=n)
    diabetes = (rng.random(n) < 1 / (1 + np.exp(-(-2.6 + 0.035 * (age - 50)
                                                   + 0.09 * (bmi - 28))))).astype(float)
    income = rng.uniform(0.0, 5.0, size=n)
    sodium = rng.normal(3.4 + 0.2 * cluster_shift[cluster], 1.1)

    x = np.empty((n, len(NAMES)))
    x[:, 0] = 1.0
    for j, col in enumerate([age / 10, male, bmi, water, diabetes, income, sodium], start=1):
        x[:, j] = col
    cluster_effect = rng.normal(0.0, CLUSTER_SD, size=n_clusters)
    eta = x @ TRUE_BETA + cluster_effect[cluster]
    y = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(float)

    frame = pd.DataFrame({"weight": weight, "strata": stratum + 1, "psu": local_id[cluster]})
    for j, name in enumerate(COVARIATES, start=1):
        frame[name] = x[:, j]
    frame["y"] = y
    return Data(frame=frame, x=x, y=y, w=weight)


def time_fit(data: Data, design, repeats: int):
    """Wall-clock seconds of every fit (the first one on a design fresh from make_design)."""
    times, result = [], None
    for _ in range(repeats):
        gc.collect()
        start = time.perf_counter()
        result = fit(data.x, data.y, data.w, design, NAMES)
        times.append(time.perf_counter() - start)
    return times, result


def peak_memory(data: Data) -> int:
    """Peak bytes newly allocated (tracemalloc) during one fit, above what was live before.

    The Design is built afresh (outside the measurement), so anything a first fit caches on
    it counts towards the peak."""
    design = make_design(data.frame, DesignSpec("weight", "strata", "psu"))
    return peak_bytes(lambda: fit(data.x, data.y, data.w, design, NAMES))


# ---------------------------------------------------------------------------------------- R --

R_SCRIPT = R_READ_MATRIX + r"""
suppressMessages(library(survey))
des <- svydesign(ids = ~psu, strata = ~strata, weights = ~weight, nest = TRUE, data = d)
form <- as.formula(paste("y ~", paste(cols[4:(k - 1)], collapse = " + ")))
invisible(gc())
tm <- system.time(f <- svyglm(form, design = des, family = quasibinomial(),
                              control = glm.control(epsilon = 1e-14, maxit = 100)))
cat(sprintf("RTIME %.6f\n", tm[["elapsed"]]))
cat("RCOEF", sprintf("%.17g", coef(f)), "\n")
cat("RSE", sprintf("%.17g", SE(f)), "\n")
cat("RITER", f$iter, "\n")
"""


def run_r(data: Data, rscript: str, workdir: Path) -> dict:
    cols = ["weight", "strata", "psu", *COVARIATES, "y"]
    return run_r_on_matrix(rscript, R_SCRIPT, data.frame[cols].to_numpy(dtype="<f8"), cols,
                           workdir)


# --------------------------------------------------------------------------------- report --

def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, nargs="+", default=[300_000, 1_000_000])
    parser.add_argument("--no-r", action="store_true", help="skip the R svyglm comparison")
    parser.add_argument("--repeats", type=int, default=3, help="timed fits per size (best of)")
    parser.add_argument("--seed", type=int, default=20260601)
    args = parser.parse_args(argv)

    use_r, r_note = preamble(args.no_r, "survey")

    rows_out = []
    with tempfile.TemporaryDirectory(prefix="cohortstone-bench-") as tmp:
        for n in args.rows:
            rng = np.random.default_rng([args.seed, n])
            data = simulate(n, rng)
            design = make_design(data.frame, DesignSpec("weight", "strata", "psu"))
            times, result = time_fit(data, design, args.repeats)
            seconds = min(times)
            peak = peak_memory(data)
            info = dict(n=n, seconds=seconds, peak=peak, xbytes=data.x.nbytes,
                        strata=design.n_strata, clusters=design.n_clusters,
                        iters=result.iterations, converged=result.converged, flag=result.flag,
                        r=None)
            print(f"{n:>9,} rows: {design.n_strata} strata, {design.n_clusters} clusters, "
                  f"case share {data.y.mean():.3f}, weights {data.w.min():.0f}-"
                  f"{data.w.max():.0f}; fit best {seconds:.3f} s (first {times[0]:.3f} s), "
                  f"{result.iterations} Newton "
                  f"iterations, converged={result.converged}"
                  + (f", flag: {result.flag}" if result.flag else ""))
            if use_r:
                r = run_r(data, r_note, Path(tmp))
                rel_coef = np.max(np.abs(result.coef - r["RCOEF"]) / np.abs(r["RCOEF"]))
                rel_se = np.max(np.abs(result.se - r["RSE"]) / np.abs(r["RSE"]))
                info["r"] = dict(seconds=r["seconds"], rel_coef=rel_coef, rel_se=rel_se)
                print(f"{'':>9}       R svyglm {r['seconds']:.3f} s ({r['iter']} IRLS "
                      f"iterations, epsilon 1e-14); max rel. diff. coef {rel_coef:.2e}, "
                      f"SE {rel_se:.2e}")
            rows_out.append(info)
            del data, design
            gc.collect()

    print()
    header = (f"{'rows':>10} {'fit s':>7} {'peak MB':>8} {'peak/x':>7} {'R s':>8} "
              f"{'R/ours':>7} {'coef rdiff':>10} {'SE rdiff':>9} | "
              f"{'<=1.5s@1M':>9} {'>=5x R':>7} {'mem<=3x':>7}")
    print(header)
    print("-" * len(header))
    for info in rows_out:
        ratio_mem = info["peak"] / info["xbytes"]
        r = info["r"]
        speed = r["seconds"] / info["seconds"] if r else None
        time_ok = info["seconds"] <= TARGET_SECONDS if info["n"] == TARGET_ROWS else None
        print(f"{info['n']:>10,} {info['seconds']:>7.3f} {info['peak'] / 2**20:>8.1f} "
              f"{ratio_mem:>6.2f}x "
              + (f"{r['seconds']:>8.2f} {speed:>6.1f}x {r['rel_coef']:>10.1e} "
                 f"{r['rel_se']:>9.1e}" if r else f"{'-':>8} {'-':>7} {'-':>10} {'-':>9}")
              + f" | {mark(time_ok):>9} {mark(None if speed is None else speed >= TARGET_SPEEDUP):>7}"
              f" {mark(ratio_mem <= TARGET_MEMORY):>7}")
    print()
    print(f"targets: {TARGET_ROWS:,} rows in <= {TARGET_SECONDS} s on 2 cores; >= "
          f"{TARGET_SPEEDUP:g}x faster than R svyglm; peak memory <= {TARGET_MEMORY:g}x the "
          "design matrix (x.nbytes). fit s = best of "
          f"{args.repeats}, coefficients and design covariance included.")
    return 0


if __name__ == "__main__":
    sys.exit(main())
