"""The one module that knows the stage order: config -> data -> domain -> models -> outputs."""
from __future__ import annotations

import time
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterator

import numpy as np
import pandas as pd

from cohortstone import describe, prevalence, sources
from cohortstone.checksums import sha256
from cohortstone.config.load import load_yaml
from cohortstone.config.spec import RECURRENCE_WITH_DESIGN, ModelSpec, Study, parse_study
from cohortstone.derive import apply_derive
from cohortstone.design import Design, make_design
from cohortstone.errors import ConfigError, DataError, DesignError
from cohortstone.exposure import ModelMatrix, build, trend_matrix
from cohortstone.models import cohort, logistic, recurrence
from cohortstone.models.fit import wald_test
from cohortstone.models.summary import odds_ratio_rows
from cohortstone.population import domain
from cohortstone.report import cells, curves_plot, forest, html, manifest, markdown
from cohortstone.report import prevalence_plot
from cohortstone.report import compare as report_compare
from cohortstone.report.files import staged_folder, write_text
from cohortstone.report.tables import to_csv
from cohortstone.sources.demo import label as demo_label


@dataclass(frozen=True)
class Results:
    """What a run produced: the tidy tables, the manifest, and where the files went."""

    study: Study
    odds_ratios: pd.DataFrame | None
    manifest: dict
    output_dir: Path | None = None
    prevalence: pd.DataFrame | None = None
    prevalence_trend: pd.DataFrame | None = None
    table1: pd.DataFrame | None = None
    changes: pd.DataFrame | None = None
    hazard_ratios: pd.DataFrame | None = None          # recurrence models
    recurrence_curve: pd.DataFrame | None = None       # at 1, 2, 5 and 10 years
    recurrences_per_person: pd.DataFrame | None = None  # counting-process models
    proportional_hazards: pd.DataFrame | None = None


@dataclass
class _Clock:
    stages: dict = field(default_factory=dict)

    @contextmanager
    def stage(self, name: str) -> Iterator[None]:
        start = time.perf_counter()
        yield
        self.stages[name] = round(time.perf_counter() - start, 4)


@dataclass(frozen=True)
class Prepared:
    """Everything up to (not including) fitting: shared by `run` and `check`."""

    study: Study
    frame: pd.DataFrame
    population: np.ndarray
    flow: list
    design: Design
    matrices: dict
    source_record: dict = field(default_factory=dict)   # what the source read and did
    cohorts: dict = field(default_factory=dict)         # recurrence models: name -> Cohort


def study_from(config: str | Path | dict | Study) -> Study:
    study = config if isinstance(config, Study) else parse_study(load_yaml(config))
    if study.design is None and sources.default_design(study.data) is not None:
        study = replace(study, design=sources.default_design(study.data))  # from the files
    return study


def _where(study: Study) -> str:
    config = Path(study.config_file).name if study.config_file else "config"
    data = study.data.path.name if study.data.path is not None else f"demo {study.data.dataset}"
    data = str(study.data.dir) if study.data.source == "nhanes" else data
    return f"{config} (data: {data})"


def prepare(study: Study, clock: _Clock, write_cache: bool = True) -> Prepared:
    """Load, derive, apply the population, build the design and code every model."""
    try:
        return _prepare(study, clock, write_cache)
    except (DataError, DesignError) as exc:
        raise type(exc)(f"{_where(study)}: {exc}") from None


def _prepare(study: Study, clock: _Clock, write_cache: bool = True) -> Prepared:
    with clock.stage("load"):
        loaded = sources.load_data(study.data, sources.used_columns(study), write_cache)
        frame = loaded.frame
    with clock.stage("derive"):
        frame = apply_derive(frame, study.derive)
    with clock.stage("population"):
        population, flow = domain(frame, study.population)
    with clock.stage("design"):
        design = make_design(frame, study.design)
    with clock.stage("coding"):
        matrices, cohorts = {}, {}
        for m in study.models:
            if m.type == "recurrence":
                if design.design_based:  # a survey source's own design, say
                    raise ConfigError(f"models.{m.name}: {RECURRENCE_WITH_DESIGN}",
                                      file=study.config_file)
                cohorts[m.name] = cohort.prepare(frame, m, population)
                matrices[m.name] = cohorts[m.name].matrix
            else:
                matrices[m.name] = build(frame, m, population, design.weight)
        if study.prevalence is not None:
            prevalence.validate(frame, study.prevalence, population, design)
        if study.describe is not None:
            describe.validate(frame, study.describe)
    return Prepared(study, frame, population, flow, design, matrices, loaded.record,
                    cohorts=cohorts)


def _fit_model(spec: ModelSpec, matrix: ModelMatrix, design: Design) -> pd.DataFrame:
    w = design.weight * matrix.in_model
    names = matrix.names()
    fit = logistic.fit(matrix.x, matrix.y, w, design, names)
    p_trend = p_joint = None
    exposure_cols = [j for j, c in enumerate(matrix.columns) if c.role == "exposure"]
    coding = matrix.exposure_coding
    if coding.kind != "continuous" and not fit.flag:
        p_joint = wald_test(fit, exposure_cols)
        if coding.kind in ("cuts", "quantiles"):
            trend = logistic.fit(trend_matrix(matrix), matrix.y, w, design, names)
            p_trend = None if trend.flag else wald_test(trend, [1])
    return odds_ratio_rows(spec, matrix, fit, p_trend, p_joint)


def _flow_rows(prepared: Prepared) -> list[dict]:
    rows = [{"Step": "records read", "People": len(prepared.frame)}]
    rows += [{"Step": f"population: {f['step']}", "People": f["remaining"]}
             for f in prepared.flow]
    for name, matrix in prepared.matrices.items():
        for reason, count in matrix.dropped.items():
            rows.append({"Step": f"{name}: leave for {reason}", "People": -count})
        step = f"{name}: analysed"
        found = prepared.cohorts.get(name)
        if found is not None and found.person is not None:  # counting-process rows
            people = len(np.unique(found.person[matrix.in_model]))
            step += f" (interval rows of {people} people)"
        rows.append({"Step": step, "People": int(matrix.in_model.sum())})
    return rows


def _cycles(prepared: Prepared) -> list[str]:
    """Survey cycles present in the analysis population (when the data carry a `cycle`)."""
    if "cycle" not in prepared.frame.columns:
        return []
    cycles = prepared.frame.loc[prepared.population, "cycle"].dropna().unique()
    return sorted(map(str, cycles))


def _source_text(study: Study) -> str:
    if study.data.source == "demo":
        return (f"the built-in demo dataset `{study.data.dataset}` — "
                f"{demo_label(study.data.dataset)}")
    if study.data.source == "nhanes":
        return (f"the public files of the US National Health and Nutrition Examination Survey, "
                f"cycles {', '.join(study.data.cycles)}, read from {study.data.dir}")
    return f"table file {study.data.path.name}"


@dataclass(frozen=True)
class Estimates:
    """The tidy result frames of one run (None where the config did not ask for them)."""

    odds_ratios: pd.DataFrame | None
    prevalence: pd.DataFrame | None      # full precision, suppressed rows included
    prevalence_trend: pd.DataFrame | None
    table1: pd.DataFrame | None
    notes: tuple[str, ...] = ()
    fit_seconds: dict = field(default_factory=dict)
    recurrence: recurrence.RecurrenceResult | None = None   # every recurrence model, stacked


def estimate(prepared: Prepared, clock: _Clock) -> Estimates:
    """Fit every model and compute the descriptive estimates the config asks for."""
    study, design = prepared.study, prepared.design
    fit_seconds, tables, recurrences = {}, [], []
    with clock.stage("models"):
        for spec in study.models:
            start = time.perf_counter()
            if spec.type == "recurrence":
                recurrences.append(recurrence.estimate(spec, prepared.cohorts[spec.name]))
            else:
                tables.append(_fit_model(spec, prepared.matrices[spec.name], design))
            fit_seconds[spec.name] = round(time.perf_counter() - start, 4)
    odds_ratios = pd.concat(tables, ignore_index=True) if tables else None
    stacked = recurrence.stack(recurrences) if recurrences else None
    prev = trend = table1 = None
    notes: list[str] = list(stacked.notes) if stacked is not None else []
    if design.design_based:
        for name, matrix in prepared.matrices.items():
            lonely = prevalence.lonely_in_domain(design, matrix.in_model)
            if lonely:
                notes.append(f"model {name}: stratum/strata {', '.join(map(str, lonely))} hold "
                             "members of its population in one cluster only; their other "
                             "clusters contribute zero totals (the standard domain variance).")
    if study.prevalence is not None:
        with clock.stage("prevalence"):
            prev, prev_notes = prevalence.estimate(prepared.frame, study.prevalence,
                                                   prepared.population, design)
            notes += prev_notes
            if study.prevalence.trend:
                trend = prevalence.trend_test(prepared.frame, study.prevalence,
                                              prepared.population, design)
    if study.describe is not None:
        with clock.stage("describe"):
            table1 = describe.table(prepared.frame, study.describe, prepared.population, design)
    return Estimates(odds_ratios, prev, trend, table1, tuple(notes), fit_seconds, stacked)


def _info(study: Study, prepared: Prepared, estimates: Estimates, inputs: dict) -> dict:
    """What the report needs to describe the run, beyond the result frames."""
    dfs = set()
    for frame in (estimates.odds_ratios, estimates.prevalence):
        if frame is not None:
            dfs |= {int(d) for d in frame["df"].dropna()}
    return {
        "invented": demo_label(study.data.dataset) if study.data.source == "demo" else None,
        "source_text": _source_text(study),
        "cycles": _cycles(prepared),
        "inputs": {Path(k).name: v for k, v in inputs.items()},
        "flow": _flow_rows(prepared),
        "outcomes": {m.name: m.outcome for m in study.models},
        "codings": {n: m.codings for n, m in prepared.matrices.items()},
        "df_text": ", ".join(map(str, sorted(dfs))) + " df" if dfs else "",
        "versions": manifest.versions(),
        "notes": list(prepared.source_record.get("notes", [])) + list(estimates.notes),
        "source_record": prepared.source_record,
    }


def _files(study: Study, estimates: Estimates, info: dict,
           changes: pd.DataFrame | None) -> dict[str, str | bytes]:
    """Every output file's name and content; views of the result frames only. Published
    tables withhold small counts; `prevalence_full.csv` keeps everything for the analyst."""
    threshold = study.report.suppress_counts_below
    counts = cells.COUNT_COLUMNS
    files: dict[str, str | bytes] = {}
    figures = {}
    if estimates.odds_ratios is not None:
        png, svg = forest.render(estimates.odds_ratios)
        files |= {"odds_ratios.csv": to_csv(cells.protect(estimates.odds_ratios,
                                                          counts["odds_ratios"], threshold)),
                  "forest.png": png, "forest.svg": svg}
        figures["forest"] = svg
    if estimates.prevalence is not None:
        png, svg = prevalence_plot.render(estimates.prevalence,
                                          study.prevalence.trend)  # type: ignore[union-attr]
        shown = cells.protect(prevalence.published(estimates.prevalence), counts["prevalence"],
                              threshold)
        files |= {"prevalence.csv": to_csv(shown),
                  "prevalence_full.csv": to_csv(estimates.prevalence, full=True),
                  "prevalence.png": png, "prevalence.svg": svg}
        figures["prevalence"] = svg
    if estimates.prevalence_trend is not None:
        files["prevalence_trend.csv"] = to_csv(estimates.prevalence_trend)
    if estimates.table1 is not None:
        files["table1.csv"] = to_csv(cells.protect(estimates.table1, counts["table1"],
                                                   threshold))
    if estimates.recurrence is not None:
        files |= _recurrence_files(estimates, threshold, figures)
    if changes is not None:
        files["changes.csv"] = to_csv(changes)
    files["tables.md"] = markdown.document(study, estimates, info)
    files["report.html"] = html.page(study, estimates, figures, info | {"changes": changes})
    return files


def _recurrence_files(estimates: Estimates, threshold: int, figures: dict
                      ) -> dict[str, str | bytes]:
    """Hazard ratios, curves, the PH check and their figures; the forest plot then shows odds
    and hazard ratios together. Counts of people (n, events, at risk) are withheld if small."""
    result = estimates.recurrence
    files: dict[str, str | bytes] = {
        "hazard_ratios.csv": to_csv(cells.protect(result.hazard_ratios, ("n", "events"),
                                                  threshold)),
        "proportional_hazards.csv": to_csv(result.proportional_hazards)}
    if result.curve is not None:
        files["recurrence_curve.csv"] = to_csv(cells.protect(result.curve, ("at_risk",),
                                                             threshold))
    if result.per_person is not None:
        files["recurrences_per_person.csv"] = to_csv(cells.protect(result.per_person,
                                                                   ("at_risk",), threshold))
    png, svg = curves_plot.render(result.curve_steps, result.per_person_steps, threshold)
    files |= {"recurrence.png": png, "recurrence.svg": svg}
    figures["recurrence"] = svg
    png, svg = curves_plot.render_forest(estimates.odds_ratios, result.hazard_ratios)
    files |= {"forest.png": png, "forest.svg": svg}
    figures["forest"] = svg
    return files


def run(config: str | Path | dict | Study, out: str | Path | None = None,
        write: bool = True, compare: str | Path | None = None) -> Results:
    """Whole pipeline; writes `<out>/<name>/` atomically unless `write` is False. With
    `compare`, the estimates are also set against those of a previous report folder."""
    started = datetime.now(timezone.utc).isoformat(timespec="seconds")
    clock = _Clock()
    with clock.stage("config"):
        study = study_from(config)
    prepared = prepare(study, clock)
    estimates = estimate(prepared, clock)
    inputs = sources.input_hashes(study.data, prepared.source_record)
    if study.config_file:
        inputs = {study.config_file: sha256(Path(study.config_file)), **inputs}
    info = _info(study, prepared, estimates, inputs)
    record = {
        "name": study.name, "started": started, "config": study.raw,
        "inputs_sha256": inputs, "versions": info["versions"],
        "rows": {"read": len(prepared.frame), "population_flow": prepared.flow,
                 "in_population": int(prepared.population.sum()),
                 "models": {n: {"analysed": int(m.in_model.sum()), "left_domain": m.dropped}
                            for n, m in prepared.matrices.items()}},
        "codings": info["codings"],
        "source": prepared.source_record or None,
        "notes": info["notes"],
        "seconds": {"stages": clock.stages, "model_fits": estimates.fit_seconds},
    }
    changes = None
    if compare is not None:
        with clock.stage("compare"):
            changes = report_compare.changes(Path(compare), {
                "odds_ratios": estimates.odds_ratios, "prevalence": estimates.prevalence,
                "table1": estimates.table1,
                "hazard_ratios": None if estimates.recurrence is None
                else estimates.recurrence.hazard_ratios})
    target = None
    if write:
        with clock.stage("write"):
            files = _files(study, estimates, info, changes)
            target = Path(out if out is not None else study.output) / study.name
            with staged_folder(target) as folder:
                for name, content in files.items():
                    if isinstance(content, bytes):
                        (folder / name).write_bytes(content)
                    else:
                        write_text(folder, name, content)
                record["seconds"]["stages"] = dict(clock.stages)
                write_text(folder, "manifest.json", manifest.to_json(record))
    found = estimates.recurrence
    return Results(study=study, odds_ratios=estimates.odds_ratios,
                   prevalence=estimates.prevalence, prevalence_trend=estimates.prevalence_trend,
                   table1=estimates.table1, changes=changes, manifest=record,
                   output_dir=target,
                   hazard_ratios=None if found is None else found.hazard_ratios,
                   recurrence_curve=None if found is None else found.curve,
                   recurrences_per_person=None if found is None else found.per_person,
                   proportional_hazards=None if found is None else found.proportional_hazards)


def check(config: str | Path | dict | Study) -> str:
    """Validate config and data (columns, codes, design) without fitting; return a summary."""
    clock = _Clock()
    study = study_from(config)
    prepared = prepare(study, clock, write_cache=False)
    lines = [f"config `{study.name}`: valid",
             f"data: {len(prepared.frame)} rows, {prepared.frame.shape[1]} columns "
             f"({_source_text(study)})",
             f"population: {int(prepared.population.sum())} rows"]
    d = prepared.design
    if d.design_based:
        lines.append(f"design: {d.n_strata} strata, {d.n_clusters} clusters")
    for name, matrix in prepared.matrices.items():
        left = ", ".join(f"{v} {k}" for k, v in matrix.dropped.items()) or "none"
        counted = "events" if name in prepared.cohorts else "cases"
        lines.append(f"model `{name}`: {int(matrix.in_model.sum())} rows analysed, "
                     f"{int(matrix.y[matrix.in_model].sum())} {counted}; left the domain: {left}")
    if study.prevalence is not None:
        lines.append(f"prevalence of `{study.prevalence.outcome}`: columns and codes valid")
    if study.describe is not None:
        lines.append(f"describe: {len(study.describe.columns)} columns found")
    lines += sources.summary_lines(study.data, prepared.source_record)
    return "\n".join(lines)
