"""Benchmark: Cox fit for time to first recurrence with a clinic-clustered robust variance.

Run as a plain script, not a test:

    python benchmarks/recurrence_fit.py [--rows 300000 1000000] [--no-r] [--repeats 3]

For each size it simulates an INVENTED cohort: `--clusters` clinics, 6 covariates (age per 10
years, male, BMI, fluid litres a day, citrate, diabetes), exponential recurrence times with a
shared clinic effect, uniform censoring over 15 years, follow-up rounded to whole days and
expressed in years (days / 365.25), so many times are tied and Efron's method matters. It times
`cohortstone.models.cox.fit` (Newton–Raphson on the Efron partial likelihood *and* the robust
variance summed to clinics): best of `--repeats` wall-clock runs. Peak additional memory during
one fit is measured with tracemalloc and shown as a multiple of `x.nbytes`.

When Rscript and its `survival` package are available (and `--no-r` is not given) the same
data go to R as raw little-endian doubles (base `readBin`) and R's `coxph(Surv(time, event) ~
..., ties = "efron")` is fitted in the same run, with `coxph.control(eps = 1e-10)` so that both
stop at a comparably tight convergence; only the `coxph` calls are timed (`system.time`):

  * without `cluster()` (the point fit and model-based variance) at every size, and
  * with `+ cluster(clinic)` (the robust variance) up to `--r-cluster-max-rows` people
    (default 300,000): R's Efron score residuals loop over the risk set of every event time,
    so their time grows with people × events — about 10 minutes at 300,000 people here, and
    by that rule hours at 1,000,000. Larger sizes print the extrapolation instead; raise the
    limit to measure it.

R is a reference for speed and for the numbers: the maximum relative differences of the
coefficients and of the robust standard errors are printed.

Targets (printed as PASS/MISS, figures only; the script exits 0 unless it crashes):
  * 1,000,000 people fitted in <= 15 s (on 2 cores).
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

from common import R_READ_MATRIX, mark, peak_bytes, preamble, run_r_on_matrix

from cohortstone.models import cox

TARGET_ROWS = 1_000_000
TARGET_SECONDS = 15.0
NAMES = ["age_per10", "male", "bmi", "fluid_l_day", "citrate", "diabetes"]
# Simulation truth on the log-hazard scale (invented values).
TRUE_BETA = np.array([-0.08, 0.20, 0.02, -0.30, -0.35, 0.25])


@dataclass
class Data:
    x: np.ndarray        # n x 6, float64
    time: np.ndarray     # years (whole days / 365.25)
    event: np.ndarray    # float 0/1
    clinic: np.ndarray   # int codes 0..G-1


def simulate(n: int, clusters: int, rng: np.random.Generator) -> Data:
    clinic = rng.integers(0, clusters, n)
    shift = rng.normal(0.0, 1.0, clusters)[clinic]
    x = np.empty((n, len(NAMES)))
    x[:, 0] = rng.normal(50, 13, n) / 10
    x[:, 1] = rng.random(n) < 0.6
    x[:, 2] = rng.normal(28 + 0.8 * shift, 5)
    x[:, 3] = rng.gamma(7.0, 0.29, n)
    x[:, 4] = rng.random(n) < 0.3
    x[:, 5] = rng.random(n) < 0.1
    frailty = rng.gamma(1 / 0.2, 0.2, clusters)[clinic]
    eta = x @ TRUE_BETA
    recurrence = rng.exponential(1.0, n) / (0.12 * frailty * np.exp(eta - eta.mean()))
    censor = rng.uniform(0, 15, n)
    days = np.maximum(np.round(np.minimum(recurrence, censor) * 365.25), 1)
    return Data(x=x, time=days / 365.25, event=(recurrence <= censor).astype(float),
                clinic=clinic)


def time_fit(data: Data, repeats: int, clustered: bool = True):
    times, result = [], None
    for _ in range(repeats):
        gc.collect()
        start = time.perf_counter()
        result = cox.fit(data.x, data.time, data.event,
                         cluster=data.clinic if clustered else None, names=NAMES)
        times.append(time.perf_counter() - start)
    return times, result


def peak_memory(data: Data) -> int:
    """Peak bytes newly allocated (tracemalloc) during one clustered fit."""
    return peak_bytes(lambda: cox.fit(data.x, data.time, data.event, cluster=data.clinic,
                                      names=NAMES))


# ---------------------------------------------------------------------------------------- R --

R_SCRIPT = R_READ_MATRIX + r"""
suppressMessages(library(survival))
form <- as.formula(paste("Surv(time, event) ~", paste(cols[4:k], collapse = " + "),
                         "+ cluster(clinic)"))
plain <- as.formula(paste("Surv(time, event) ~", paste(cols[4:k], collapse = " + ")))
control <- coxph.control(eps = 1e-10, iter.max = 100)
invisible(gc())
tm <- system.time(f <- coxph(plain, data = d, ties = "efron", control = control))
cat(sprintf("RTIME_PLAIN %.6f\n", tm[["elapsed"]]))
cat("RCOEF", sprintf("%.17g", coef(f)), "\n")
cat("RITER", f$iter, "\n")
if (args[5] == "yes") {
  invisible(gc())
  tm <- system.time(f <- coxph(form, data = d, ties = "efron", control = control))
  cat(sprintf("RTIME %.6f\n", tm[["elapsed"]]))
  cat("RSE", sprintf("%.17g", sqrt(diag(f$var))), "\n")
}
"""


def run_r(data: Data, rscript: str, workdir: Path, clustered: bool) -> dict:
    cols = ["time", "event", "clinic", *NAMES]
    matrix = np.column_stack([data.time, data.event, data.clinic.astype(float), data.x])
    return run_r_on_matrix(rscript, R_SCRIPT, matrix, cols, workdir,
                           "yes" if clustered else "no")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, nargs="+", default=[300_000, 1_000_000])
    parser.add_argument("--clusters", type=int, default=1000, help="clinics (variance clusters)")
    parser.add_argument("--no-r", action="store_true", help="skip the R coxph comparison")
    parser.add_argument("--repeats", type=int, default=3, help="timed fits per size (best of)")
    parser.add_argument("--r-cluster-max-rows", type=int, default=300_000,
                        help="largest size at which R's clustered coxph is run (it is slow)")
    parser.add_argument("--seed", type=int, default=20261205)
    args = parser.parse_args(argv)

    use_r, r_note = preamble(args.no_r, "survival")

    rows_out, r_cluster_seen = [], None
    with tempfile.TemporaryDirectory(prefix="cohortstone-bench-") as tmp:
        for n in args.rows:
            data = simulate(n, args.clusters, np.random.default_rng([args.seed, n]))
            times, result = time_fit(data, args.repeats)
            plain = min(time_fit(data, args.repeats, clustered=False)[0])
            seconds = min(times)
            peak = peak_memory(data)
            distinct = len(np.unique(data.time[data.event == 1]))
            info = dict(n=n, seconds=seconds, plain=plain, peak=peak, xbytes=data.x.nbytes,
                        r=None)
            print(f"{n:>9,} people: {args.clusters} clinics, {int(data.event.sum()):,} "
                  f"recurrences at {distinct:,} distinct times; fit with robust variance best "
                  f"{seconds:.3f} s (first {times[0]:.3f} s; without it {plain:.3f} s), "
                  f"{result.iterations} Newton iterations, converged={result.converged}"
                  + (f", flag: {result.flag}" if result.flag else ""), flush=True)
            if use_r:
                clustered = n <= args.r_cluster_max_rows
                r = run_r(data, r_note, Path(tmp), clustered)
                rel_coef = np.max(np.abs(result.coef - r["RCOEF"]) / np.abs(r["RCOEF"]))
                info["r"] = dict(plain=r["plain_seconds"], rel_coef=rel_coef,
                                 seconds=r.get("seconds"), rel_se=None)
                line = (f"{'':>9}         R coxph without cluster() {r['plain_seconds']:.3f} s "
                        f"({r['iter']} iterations, eps 1e-10); max rel. diff. coef "
                        f"{rel_coef:.2e}")
                if clustered:
                    rel_se = np.max(np.abs(result.se - r["RSE"]) / np.abs(r["RSE"]))
                    info["r"]["rel_se"] = rel_se
                    r_cluster_seen = (n, r["seconds"])
                    line += (f"\n{'':>9}         R coxph with cluster(clinic) {r['seconds']:.3f}"
                             f" s; max rel. diff. robust SE {rel_se:.2e}")
                elif r_cluster_seen is not None:
                    m, sec = r_cluster_seen
                    line += (f"\n{'':>9}         R coxph with cluster(clinic) not run (over "
                             f"--r-cluster-max-rows); from {m:,} people in {sec:.0f} s, time "
                             f"~ people x events suggests ~{sec * (n / m) ** 2:,.0f} s")
                print(line, flush=True)
            rows_out.append(info)
            del data
            gc.collect()

    print()
    header = (f"{'people':>10} {'fit s':>7} {'peak MB':>8} {'peak/x':>7} {'R s':>8} "
              f"{'R/ours':>7} {'R plain s':>9} {'R plain/ours':>12} {'coef rdiff':>10} "
              f"{'SE rdiff':>9} | {'<=15s@1M':>8}")
    print(header)
    print("-" * len(header))
    for info in rows_out:
        r = info["r"] or {}
        ok = info["seconds"] <= TARGET_SECONDS if info["n"] == TARGET_ROWS else None

        def cell(value, fmt, width, unit=""):
            text = "-" if value is None else f"{value:{fmt}}{unit}"
            return f"{text:>{width}}"
        ratio = r["seconds"] / info["seconds"] if r.get("seconds") else None
        plain_ratio = r["plain"] / info["seconds"] if r.get("plain") else None
        print(f"{info['n']:>10,} {info['seconds']:>7.3f} {info['peak'] / 2**20:>8.1f} "
              f"{info['peak'] / info['xbytes']:>6.2f}x {cell(r.get('seconds'), '.2f', 8)} "
              f"{cell(ratio, '.1f', 7, 'x')} {cell(r.get('plain'), '.2f', 9)} "
              f"{cell(plain_ratio, '.2f', 12, 'x')} {cell(r.get('rel_coef'), '.1e', 10)} "
              f"{cell(r.get('rel_se'), '.1e', 9)} | {mark(ok):>8}")
    print()
    print(f"target: {TARGET_ROWS:,} people with 6 covariates and a clinic-clustered robust "
          f"variance in <= {TARGET_SECONDS:g} s on 2 cores. fit s = best of {args.repeats}, "
          "Efron fit and robust variance included. R/ours = R's clustered coxph time / ours; "
          "R plain/ours = R's coxph without cluster() (no robust variance) / ours with it.")
    return 0


if __name__ == "__main__":
    sys.exit(main())
