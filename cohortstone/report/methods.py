"""The methods paragraph, generated from the config and the run (never written by hand)."""
from __future__ import annotations

from cohortstone.config.spec import Study
from cohortstone.exposure import Coding


def coding_text(coding: Coding, ratio: str = "odds ratio") -> str:
    if coding.kind == "continuous":
        return f"`{coding.column}` as a continuous term ({ratio} per {coding.per:g} units)"
    levels = ", ".join(coding.levels[1:])
    what = {"cuts": "groups by cut points", "quantiles": "weighted quantile groups",
            "categorical": "categories"}[coding.kind]
    return f"`{coding.column}` in {what} {levels} against the reference {coding.reference}"


def _design_text(study: Study, info: dict) -> list[str]:
    d = study.design
    if d is None and study.prevalence is None and all(m.type == "recurrence"
                                                      for m in study.models):
        return ["The data are a cohort without survey weights: every analysed person counts "
                "once."]
    if d is None:
        return ["No survey design was given: estimates treat the data as a simple random "
                "sample (odds ratios with model-based standard errors and normal-distribution "
                "intervals; proportions with exact Clopper\u2013Pearson intervals)."]
    design = [f"strata `{d.strata}`"] if d.strata else []
    design.append(f"clusters `{d.cluster}`" if d.cluster else "each person as a cluster")
    parts = [
        f"Estimates are weighted by `{d.weight}`" if d.weight else "Estimates are unweighted",
        f" and their variances come from Taylor-series linearisation ({', '.join(design)}; "
        "clusters treated as sampled with replacement within strata). Confidence intervals and "
        "p-values use the t distribution with design degrees of freedom: clusters minus strata, "
        f"counting only those holding members of each estimate's population ({info['df_text']})."]
    text = ["".join(parts)]
    if d.single_cluster_strata == "overall_mean":
        text.append("Strata holding a single cluster were centred on the mean of all cluster "
                    "totals.")
    return text


def _models_text(study: Study, info: dict) -> list[str]:
    logistic = [m.name for m in study.models if m.type != "recurrence"]
    if not logistic:
        return _recurrence_text(study, info)
    parts = ["Odds ratios come from logistic regression fitted by weighted maximum likelihood; "
             "intervals are Wald intervals on the log scale. People missing the outcome, the "
             "exposure or a covariate of a model left that model's population (complete-case "
             "analysis; counts are in the flow table)."]
    for model, codings in info["codings"].items():
        if model in logistic:
            parts.append(f"Model {model}: " + "; ".join(coding_text(c) for c in codings) + ".")
    parts.append("For grouped exposures, the p for trend treats each group's weighted median "
                 "as a score, and the joint test of the groups is an adjusted Wald F test "
                 "(Korn & Graubard, 1990).")
    return parts + _recurrence_text(study, info)


def _follow_up_text(spec) -> str:
    r = spec.recurrence
    if r.form == "dates":
        return (f"follow-up from `{r.index_date}` to `{r.event_date}` (a recurrence) or else "
                f"`{r.end_date}`, in years = days / 365.25")
    if r.form == "counting":
        return (f"every recurrence of each person (`{r.id}`) from counting-process rows "
                f"(`{r.start}`, `{r.time}`] with `{r.event}` (Andersen\u2013Gill)")
    return f"time to the first recurrence from `{r.time}` (years) and `{r.event}`"


def _recurrence_text(study: Study, info: dict) -> list[str]:
    """Cox models (Efron ties), robust variance, competing death, curves, the PH check."""
    models = [m for m in study.models if m.type == "recurrence"]
    if not models:
        return []
    parts = ["Hazard ratios come from Cox proportional-hazards regression on time since the "
             "index stone (Cox, 1972) with Efron's method for tied times (Efron, 1977); "
             "intervals are Wald intervals on the log scale with the normal distribution. "
             "Where a model names a cluster, and always for repeated recurrences (clustered on "
             "the person), the variance is the robust sandwich with score residuals summed "
             "within clusters (Lin & Wei, 1989). People missing the exposure or a covariate "
             "left that model (complete-case analysis)."]
    for spec in models:
        r = spec.recurrence
        codings = "; ".join(coding_text(c, "hazard ratio") for c in info["codings"][spec.name])
        extra = f"; variance clustered on `{r.cluster or r.id}`" if (r.cluster or r.id) else ""
        if r.competing and r.form == "counting":
            extra += f"; death (`{r.competing}`) ends follow-up, and its own hazard ratios " \
                "are reported too"
        elif r.competing:
            extra += (f"; death (`{r.competing}`) competes: recurrence hazard ratios are "
                      "cause-specific, death's own are reported too")
        parts.append(f"Model {spec.name}: {_follow_up_text(spec)}; {codings}{extra}.")
    return parts + _curves_text(models)


def _curves_text(models: list) -> list[str]:
    """How the curves were estimated: only the kinds the models produced."""
    forms = {(m.recurrence.form == "counting", m.recurrence.competing is not None)
             for m in models}
    parts = []
    if (False, False) in forms:
        parts.append("Cumulative recurrence is 1 \u2212 the Kaplan\u2013Meier estimate with "
                     "Greenwood's variance and a log(\u2212log) interval.")
    if (False, True) in forms:
        parts.append("With death competing, cumulative recurrence is the Aalen\u2013Johansen "
                     "cumulative incidence with an infinitesimal-jackknife variance and a "
                     "log(\u2212log) interval.")
    if any(counting for counting, _ in forms):
        parts.append("For repeated recurrences, the mean cumulative number of recurrences per "
                     "person (Nelson\u2013Aalen form) has the robust variance of Lawless & "
                     "Nadeau (1995).")
    parts.append("Proportional hazards were checked per term by the score test of a "
                 "coefficient changing with time on the Kaplan\u2013Meier scale (Grambsch & "
                 "Therneau, 1994); p < 0.05 is reported as a possible violation. Follow-up "
                 "times closer than 1.5e-8 were treated as tied.")
    return parts


def _prevalence_text(study: Study) -> list[str]:
    spec = study.prevalence
    if spec is None:
        return []
    parts = [f"Prevalence of `{spec.outcome}` is a weighted proportion with a Korn\u2013Graubard "
             "95% interval (Clopper\u2013Pearson on the effective sample size, adjusted for the "
             "degrees of freedom). Reliability follows the NCHS Data Presentation Standards for "
             "Proportions (Parker et al., 2017): estimates with an effective sample size below "
             "30, an interval 0.30 wide or wider, or an interval wider than 0.05 and more than "
             "130% of the estimate are suppressed; fewer than 8 df, or an estimate of 0% or "
             "100%, call for review."]
    if spec.standardize is not None:
        s = spec.standardize
        source = ("the 2000 US standard population (Klein & Schoenborn, 2001)"
                  if s.name != "custom" else "user-supplied standard weights")
        groups = ", ".join(f"{label} {100 * w:.1f}%" for label, w in zip(s.labels(), s.weights))
        parts.append(f"Age-standardized estimates use direct standardization by `{s.column}` to "
                     f"{source} ({groups}); their variances are linearised like the crude ones.")
    if spec.trend:
        parts.append(f"Linear trend across `{spec.trend}` is tested by design-based logistic "
                     "regression on the cycles' order.")
    return parts


def _describe_text(study: Study) -> list[str]:
    if study.describe is None:
        return []
    return ["Table 1 gives weighted means and percentages with linearised standard errors "
            "beside unweighted counts."]


def _survey_files_text(info: dict) -> list[str]:
    """The national survey source: which weight and why, how cycles were combined, recodes."""
    record = info.get("source_record") or {}
    if record.get("source") != "nhanes":
        return []
    parts = [f"Data are the public files of the US National Health and Nutrition Examination "
             f"Survey, cycles {', '.join(record['cycles'])}, merged on the respondent number "
             f"(SEQN). {record['weights']['text']}"]
    if record.get("missing_codes"):
        parts.append("Refused and don't-know answers were set to missing (their counts per "
                     "code and cycle are in the manifest); age is top-coded at 80 as in the "
                     "files.")
    return parts


def methods_text(study: Study, info: dict) -> str:
    """One paragraph describing exactly what was done, generated from the config and the run."""
    parts = _design_text(study, info) + _survey_files_text(info)
    if study.population:
        conds = "; ".join(f"`{c.text}`" for c in study.population)
        parts.append(f"The analysis population was {conds}; it was applied by giving everyone "
                     "else zero weight, keeping every record for variance estimation.")
    parts += _describe_text(study) + _prevalence_text(study) + _models_text(study, info)
    v = info["versions"]
    parts.append(f"Software: cohortstone {v.get('cohortstone')}, Python {v.get('python')}, "
                 f"numpy {v.get('numpy')}, pandas {v.get('pandas')}, scipy {v.get('scipy')}.")
    return " ".join(parts)
