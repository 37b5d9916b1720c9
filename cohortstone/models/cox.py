"""Cox proportional-hazards regression with Efron's method for tied times, vectorised.

The partial likelihood is computed without a loop over rows or event times. Every row is
placed, once, between the sorted distinct event times: it is at risk at the event times
τₖ with start < τₖ ≤ stop (right-censored rows start at −∞). Risk-set sums then come from
bin counts and cumulative sums, and Efron's approximation (Efron, JASA 1977) is handled on
"slots": a time with d tied events contributes d terms l = 0..d−1 whose risk set removes
the fraction l/d of the tied events' risk. With cₖ = Σₗ 1/denₖₗ and gₖ = Σₗ (l/d)/denₖₗ

    score        U = Xᵀ m,           m = δ − r·(Cᵢ − δ gₖ)   (Efron martingale residuals)
    information  I = Xᵀ diag(δ − m) X − Σₖₗ x̄ₖₗ x̄ₖₗᵀ

where Cᵢ sums c over the row's risk window, so one weighted Gram matrix replaces the
per-time second moments. The robust variance (Lin & Wei, JASA 1989) sums the score
residuals (Therneau & Grambsch, *Modeling Survival Data*, 2000, §7.2; Efron form as in
R's survival package) within clusters: V (Σ_c U_c U_cᵀ) V with V = I⁻¹, no small-sample
factor. Counting-process rows (start, stop] give the Andersen–Gill model (Andersen & Gill,
Ann Stat 1982); clustering on the person gives its robust variance.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

MAX_ITERATIONS = 60
TOLERANCE = 1e-10
BLOCK_ROWS = 8192


@dataclass(frozen=True)
class RiskSets:
    """Where every row sits among the distinct event times (fixed for all β)."""

    times: np.ndarray        # distinct event times, increasing (K)
    deaths: np.ndarray       # events at each time (K)
    exit_bin: np.ndarray     # per row: number of event times <= stop
    entry_bin: np.ndarray | None   # per row: number of event times <= start (None: no start)
    event: np.ndarray        # per row, bool
    event_bin: np.ndarray    # per event row: its time's index k
    slot_time: np.ndarray    # per slot (one per event): index k of its time
    slot_fraction: np.ndarray  # per slot: l / d

    @property
    def n_times(self) -> int:
        return len(self.times)


def risk_sets(stop: np.ndarray, event: np.ndarray, start: np.ndarray | None = None) -> RiskSets:
    """Bins of every row among the distinct event times; O(n log K), no sort of the rows."""
    stop = np.asarray(stop, dtype=float)
    event = np.asarray(event) != 0
    times, deaths = np.unique(stop[event], return_counts=True)
    exit_bin = np.searchsorted(times, stop, side="right")
    entry_bin = None if start is None else np.searchsorted(times, np.asarray(start, float),
                                                           side="right")
    slot_time = np.repeat(np.arange(len(times)), deaths)
    first = np.concatenate([[0], np.cumsum(deaths)[:-1]])
    slot_fraction = (np.arange(len(slot_time)) - np.repeat(first, deaths)) / deaths[slot_time]
    return RiskSets(times=times, deaths=deaths, exit_bin=exit_bin, entry_bin=entry_bin,
                    event=event, event_bin=exit_bin[event] - 1, slot_time=slot_time,
                    slot_fraction=slot_fraction)


def _window(per_time: np.ndarray, rs: RiskSets) -> np.ndarray:
    """Per row, the sum of `per_time` (K, or K × p) over the event times it is at risk at."""
    cum = np.concatenate([np.zeros((1,) + per_time.shape[1:]), np.cumsum(per_time, axis=0)])
    out = cum[rs.exit_bin]
    if rs.entry_bin is not None:
        out -= cum[rs.entry_bin]
    return out


def at_risk_sums(values: np.ndarray, rs: RiskSets) -> np.ndarray:
    """Σ over the risk set at each event time of `values` (n, or n × p): bins + cumsums."""
    k = rs.n_times
    cols = values.reshape(len(values), -1)
    out = np.empty((k, cols.shape[1]))
    for j in range(cols.shape[1]):
        exits = np.bincount(rs.exit_bin, weights=cols[:, j], minlength=k + 1)
        tail = np.cumsum(exits[::-1])[::-1]          # Σ over rows with exit_bin >= b
        total = tail[1:]                             # rows with exit_bin > k (τₖ <= stop)
        if rs.entry_bin is not None:
            entries = np.bincount(rs.entry_bin, weights=cols[:, j], minlength=k + 1)
            total = total - np.cumsum(entries[::-1])[::-1][1:]   # minus rows with start >= τₖ
        out[:, j] = total
    return out.reshape((k,) + values.shape[1:])


def _event_sums(values: np.ndarray, rs: RiskSets) -> np.ndarray:
    """Σ over the events at each event time of `values` (n, or n × p)."""
    cols = values[rs.event].reshape(int(rs.event.sum()), -1)
    out = np.column_stack([np.bincount(rs.event_bin, weights=cols[:, j], minlength=rs.n_times)
                           for j in range(cols.shape[1])])
    return out.reshape((rs.n_times,) + values.shape[1:])


@dataclass(frozen=True)
class Pass:
    """The partial likelihood and its pieces at one β (Efron)."""

    loglik: float
    r: np.ndarray            # exp(η) per row
    denominator: np.ndarray  # per slot
    xbar: np.ndarray         # per slot × p: risk-weighted mean of x in the slot's risk set
    c: np.ndarray            # per time: Σₗ 1/den
    g: np.ndarray            # per time: Σₗ (l/d)/den
    martingale: np.ndarray   # per row: δ − expected count (Efron)


def evaluate(x: np.ndarray, beta: np.ndarray, rs: RiskSets) -> Pass:
    """One pass over the data at `beta`; `x` should be centred (exp(η) stays moderate)."""
    eta = x @ beta
    with np.errstate(over="ignore"):
        r = np.exp(eta)
    s0 = at_risk_sums(r, rs)
    s1 = at_risk_sums(x * r[:, None], rs)
    a0 = _event_sums(r, rs)
    a1 = _event_sums(x * r[:, None], rs)
    k, f = rs.slot_time, rs.slot_fraction
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        den = s0[k] - f * a0[k]
        xbar = (s1[k] - f[:, None] * a1[k]) / den[:, None]
        c = np.bincount(k, weights=1 / den, minlength=rs.n_times)
        g = np.bincount(k, weights=f / den, minlength=rs.n_times)
        expected = r * _window(c, rs)
        expected[rs.event] -= r[rs.event] * g[rs.event_bin]
        loglik = float(np.sum(eta[rs.event]) - np.sum(np.log(den)))
    return Pass(loglik=loglik, r=r, denominator=den, xbar=xbar, c=c, g=g,
                martingale=rs.event - expected)


def gram(x: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Xᵀ diag(v) X summed over row blocks (no n × p temporary beyond one block)."""
    p = x.shape[1]
    out = np.zeros((p, p))
    for start in range(0, len(x), BLOCK_ROWS):
        block = x[start:start + BLOCK_ROWS]
        out += block.T @ (block * v[start:start + BLOCK_ROWS, None])
    return out


def information(x: np.ndarray, state: Pass, rs: RiskSets, time_weight: np.ndarray | None = None
                ) -> np.ndarray:
    """Σₖ wₖ Σₗ Var_kl(x) (Efron): the information when w ≡ 1; other w for the PH test."""
    w = np.ones(rs.n_times) if time_weight is None else time_weight
    v = state.r * _window(state.c * w, rs)
    v[rs.event] -= state.r[rs.event] * (state.g * w)[rs.event_bin]
    slot_w = w[rs.slot_time]
    return gram(x, v) - state.xbar.T @ (state.xbar * slot_w[:, None])


@dataclass(frozen=True)
class CoxFit:
    """Log hazard ratios with their covariance (robust when clustered)."""

    coef: np.ndarray
    cov: np.ndarray
    model_cov: np.ndarray     # inverse information (model-based)
    loglik: float
    null_loglik: float
    converged: bool
    iterations: int
    clusters: int | None      # number of clusters of the robust variance, or None
    flag: str = ""

    @property
    def se(self) -> np.ndarray:
        return np.sqrt(np.clip(np.diag(self.cov), 0, None))


def _newton(x: np.ndarray, rs: RiskSets) -> tuple[np.ndarray, Pass, np.ndarray, bool, int, float]:
    """Newton–Raphson from β = 0 with step halving; stops when the relative step < 1e-10."""
    beta = np.zeros(x.shape[1])
    state = evaluate(x, beta, rs)
    null = state.loglik
    info = information(x, state, rs)
    for iteration in range(1, MAX_ITERATIONS + 1):
        score = x.T @ state.martingale
        try:
            step = np.linalg.solve(info, score)
        except np.linalg.LinAlgError:
            step = np.linalg.lstsq(info, score, rcond=None)[0]
        for _ in range(40):  # halve until the partial likelihood does not fall
            candidate = evaluate(x, beta + step, rs)
            if np.isfinite(candidate.loglik) and \
                    candidate.loglik >= state.loglik - 1e-12 * abs(state.loglik):
                break
            step = step / 2
        beta = beta + step
        state = candidate
        info = information(x, state, rs)
        if np.max(np.abs(step) / (1 + np.abs(beta))) < TOLERANCE:
            return beta, state, info, True, iteration, null
    return beta, state, info, False, MAX_ITERATIONS, null


def score_residuals(x: np.ndarray, state: Pass, rs: RiskSets) -> np.ndarray:
    """Per-row score residuals (n × p), Efron form; they sum to the score."""
    k, f, den = rs.slot_time, rs.slot_fraction, state.denominator
    deaths = rs.deaths.astype(float)
    mean_xbar = np.column_stack([np.bincount(k, weights=state.xbar[:, j], minlength=rs.n_times)
                                 for j in range(x.shape[1])]) / deaths[:, None]
    h1 = np.column_stack([np.bincount(k, weights=state.xbar[:, j] / den, minlength=rs.n_times)
                          for j in range(x.shape[1])])
    g1 = np.column_stack([np.bincount(k, weights=f * state.xbar[:, j] / den,
                                      minlength=rs.n_times) for j in range(x.shape[1])])
    out = x * state.martingale[:, None]
    out += state.r[:, None] * _window(h1, rs)
    ev = rs.event
    out[ev] -= mean_xbar[rs.event_bin] + state.r[ev, None] * g1[rs.event_bin]
    return out


def cluster_sums(values: np.ndarray, cluster: np.ndarray) -> np.ndarray:
    """Σ within clusters (codes 0..G−1) of each column of `values`: one bincount per column."""
    g = int(cluster.max()) + 1
    return np.column_stack([np.bincount(cluster, weights=values[:, j], minlength=g)
                            for j in range(values.shape[1])])


def no_event_columns(x: np.ndarray, event: np.ndarray) -> list[int]:
    """0/1 indicator columns whose '1' rows hold no event (their hazard ratio is 0)."""
    out = []
    for j in range(x.shape[1]):
        col = x[:, j]
        ones = col == 1
        if ones.any() and (ones | (col == 0)).all() and not event[ones].any():
            out.append(j)
    return out


def fit(x: np.ndarray, stop: np.ndarray, event: np.ndarray, start: np.ndarray | None = None,
        cluster: np.ndarray | None = None, names: list[str] | None = None) -> CoxFit:
    """Efron Cox fit of the rows given (all analysed); robust variance when `cluster` is given.

    `x` holds the covariates without an intercept; `cluster` holds integer codes 0..G−1.
    """
    names = names or [f"x{j}" for j in range(x.shape[1])]
    event = np.asarray(event) != 0
    p = x.shape[1]
    empty = no_event_columns(x, event)
    if empty:  # the likelihood has no maximum: do not iterate towards infinity
        nan = np.full((p, p), np.nan)
        return CoxFit(coef=np.full(p, np.nan), cov=nan, model_cov=nan, loglik=np.nan,
                      null_loglik=np.nan, converged=False, iterations=0, clusters=None,
                      flag="no events: " + ", ".join(names[j] for j in empty)
                      + " holds no recurrence, so its hazard ratio cannot be estimated")
    rs = risk_sets(stop, event, start)
    centred = x - x.mean(axis=0)
    beta, state, info, converged, iterations, null = _newton(centred, rs)
    flag = "" if converged else f"not converged after {iterations} iterations"
    try:
        model_cov = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        model_cov = np.full_like(info, np.nan)
    if not flag and (not np.all(np.isfinite(model_cov)) or np.linalg.cond(info) > 1e14):
        flag = "singular information matrix: a term is constant or collinear"
    cov, clusters = model_cov, None
    if cluster is not None and not flag:
        totals = cluster_sums(score_residuals(centred, state, rs), cluster)
        cov = model_cov @ (totals.T @ totals) @ model_cov
        clusters = int(len(np.unique(cluster)))
    return CoxFit(coef=beta, cov=cov, model_cov=model_cov, loglik=state.loglik,
                  null_loglik=null, converged=converged, iterations=iterations,
                  clusters=clusters, flag=flag)
