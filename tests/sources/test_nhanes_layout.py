"""INVENTED survey files in the public layout, and how the `nhanes` source finds them.

`write_survey` writes small SAS transport files named and shaped like the publisher's
(`DEMO_H.xpt`, `P_KIQ_U.XPT`, …; variables as in domain.md §1–3) with pyreadstat. Every value
is invented from a seed: these files describe nobody. The other `test_nhanes_*` modules
import it from here.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

pyreadstat = pytest.importorskip("pyreadstat")

from cohortstone.errors import DataError  # noqa: E402
from cohortstone.sources.nhanes.cycles import COMPONENTS, CYCLES  # noqa: E402
from cohortstone.sources.nhanes.files import locate, read_xpt  # noqa: E402

# Invented food codes of every group of the shipped map, plus foods that are not drinks:
# (code, grams range, kcal per 100 g). Diet drinks are the low-energy soft/fruit drinks.
FOODS = [
    (61201020, (150, 300), 39.0),   # grapefruit juice
    (61210220, (150, 350), 45.0),   # orange juice
    (61204000, (10, 40), 22.0),     # lemon juice (other citrus)
    (64104010, (150, 300), 46.0),   # apple juice (other juice)
    (92101000, (200, 500), 1.0),    # coffee
    (92302000, (200, 450), 1.0),    # tea
    (92410310, (300, 700), 41.0),   # cola (sugar-sweetened soft drink)
    (92410320, (300, 700), 0.4),    # diet cola (diet drink)
    (92510610, (200, 400), 48.0),   # fruit drink
    (92550000, (200, 400), 4.0),    # low-energy fruit drink (diet drink)
    (11111000, (100, 300), 61.0),   # milk
    (11411100, (100, 200), 63.0),   # yogurt: carved out of milk
    (93101000, (300, 900), 43.0),   # beer
    (93401010, (100, 300), 83.0),   # wine
    (93504000, (40, 120), 231.0),   # spirits (liquor)
    (94000100, (200, 1500), 0.0),   # tap water
    (51000100, (30, 120), 260.0),   # bread: not a drink
    (27111000, (100, 300), 180.0),  # a meat dish: not a drink
]


def _cycle_frames(name: str, rng: np.random.Generator, n: int, seqn_start: int) -> dict:
    """The six component tables of one invented cycle (publisher's variable names)."""
    cycle = CYCLES[name]
    p = cycle.prepandemic
    w_int, w_mec, w_day = (("WTINTPRP", "WTMECPRP", "WTDRD1PP") if p else
                           ("WTINT2YR", "WTMEC2YR", "WTDRD1"))
    seqn = np.arange(seqn_start, seqn_start + n).astype(float)
    strata = rng.integers(1, 7, n).astype(float)          # codes 1-6 in EVERY cycle
    psu = rng.integers(1, 3, n).astype(float)
    age = np.minimum(rng.integers(0, 86, n), 80).astype(float)  # top-coded at 80 in the file
    examined = rng.random(n) < 0.9
    w_interview = rng.uniform(2000, 60000, n).round(4)
    demo = pd.DataFrame({
        "SEQN": seqn, "SDDSRVYR": float(cycle.release or 12),
        "RIDSTATR": np.where(examined, 2., 1.),
        "RIAGENDR": rng.integers(1, 3, n).astype(float), "RIDAGEYR": age,
        "RIDRETH1": rng.integers(1, 6, n).astype(float), w_int: w_interview,
        w_mec: np.where(examined, (w_interview * rng.uniform(1.0, 1.2, n)).round(4), 0.0),
        "SDMVPSU": psu, "SDMVSTRA": strata})
    bmi = np.where(rng.random(n) < 0.05, np.nan, rng.normal(27.5, 5.5, n).round(1))
    body = pd.DataFrame({"SEQN": seqn[examined], "BMXBMI": bmi[examined]})
    diq = rng.choice([1., 2., 3., 7., 9., np.nan], n, p=[.1, .8, .04, .01, .02, .03])
    diabetes = pd.DataFrame({"SEQN": seqn, "DIQ010": diq})

    status = np.where(examined, rng.choice([1., 2., 4., 5.], n, p=[.85, .07, .03, .05]), np.nan)
    usable = status == 1
    water = np.where(rng.random(n) < 0.2, 0.0, rng.gamma(2, 450, n)).round(0)
    tap = (water * rng.uniform(0, 1, n)).round(0)
    other = rng.gamma(4, 400, n).round(0)
    totals = pd.DataFrame({
        "SEQN": seqn, w_day: np.where(usable, (w_interview * rng.uniform(0.9, 1.4, n)).round(4),
                                      0.0),
        "DR1DRSTZ": status, "DR1_320Z": np.where(usable, water, np.nan),
        "DR1_330Z": np.where(usable, tap, np.nan),
        "DR1BWATZ": np.where(usable, water - tap, np.nan),
        "DR1TMOIS": np.where(usable, water + other, np.nan)})[examined]

    rows = []
    for person in seqn[usable]:
        for code, (lo, hi), kcal in (FOODS[i] for i in rng.choice(len(FOODS),
                                                                     rng.integers(1, 9))):
            grams = round(float(rng.uniform(lo, hi)), 2)
            rows.append((person, code, grams, round(grams * kcal / 100, 2)))
    foods = pd.DataFrame(rows, columns=["SEQN", "DR1IFDCD", "DR1IGRMS", "DR1IKCAL"])
    foods.insert(1, "DR1ILINE", foods.groupby("SEQN").cumcount() + 1.0)

    adult = age >= 20
    coffee = foods[foods["DR1IFDCD"] == 92101000].groupby("SEQN")["DR1IGRMS"].sum()
    coffee = pd.Series(seqn).map(coffee).fillna(0).to_numpy()
    eta = -2.0 + 0.02 * (age - 45) + 0.4 * (demo["RIAGENDR"] == 1) - 0.4 * np.nan_to_num(
        water) / 1000 + 0.3 * coffee / 500 + 0.3 * (diq == 1)
    ever = np.where(rng.random(n) < 1 / (1 + np.exp(-eta)), 1., 2.)
    ever = np.where(rng.random(n) < 0.03, rng.choice([7., 9., np.nan], n), ever)
    kidney = pd.DataFrame({"SEQN": seqn, "KIQ026": ever})
    stone = ever == 1
    if cycle.letter in "EFGH":
        count = np.where(rng.random(n) < 0.1, rng.choice([777., 999.], n),
                         rng.integers(0, 6, n).astype(float))
        kidney["KID028"] = np.where(stone, count, np.nan)
    else:
        recent = rng.choice([1., 2., 7., 9.], n, p=[.15, .8, .02, .03])
        kidney["KIQ029"] = np.where(stone, recent, np.nan)
    kidney = kidney[adult]
    return {"demographics": demo, "body_measures": body, "diabetes": diabetes,
            "kidney": kidney, "day1_totals": totals, "day1_foods": foods}


SEQN_START = {"2007-2008": 41475, "2009-2010": 51624, "2011-2012": 62161, "2013-2014": 73557,
              "2015-2016": 83732, "2017-2018": 93703, "2017-2020": 109263, "2021-2023": 130378}


def write_survey(folder: Path, cycles: list[str], seed: int = 7, n: int = 420,
                 components: list[str] | None = None, case: str = "mixed") -> dict:
    """Write INVENTED files of `cycles` into `folder`; return {cycle: {component: frame}}.

    `case="mixed"` varies the letter case of the names as downloads in the wild do.
    """
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    written = {}
    for k, name in enumerate(cycles):
        frames = _cycle_frames(name, rng, n, SEQN_START[name])
        written[name] = frames
        for j, (component, frame) in enumerate(frames.items()):
            if components is not None and component not in components:
                continue
            stem = CYCLES[name].file_stem(COMPONENTS[component])
            file = f"{stem}.xpt"
            if case == "mixed":
                file = [f"{stem}.xpt", f"{stem}.XPT", f"{stem.lower()}.xpt"][(j + k) % 3]
            pyreadstat.write_xport(frame, str(folder / file), file_format_version=5,
                                   table_name=stem[:8])
    return written


# ---- the tests of this module ----------------------------------------------------------------


def test_files_are_found_in_any_letter_case(tmp_path):
    write_survey(tmp_path, ["2013-2014", "2017-2020"])
    names = {p.name for p in tmp_path.iterdir()}
    assert {"diq_h.xpt", "BMX_H.XPT", "P_DEMO.XPT"} <= names, names   # letter cases vary
    located = locate(tmp_path, ("2013-2014", "2017-2020"), list(COMPONENTS))
    assert not located.missing
    assert located.found[("2017-2020", "kidney")].stem.upper() == "P_KIQ_U"  # prefix, not suffix
    assert located.found[("2013-2014", "day1_foods")].stem.upper() == "DR1IFF_H"


def test_a_missing_component_file_is_listed_not_guessed(tmp_path):
    write_survey(tmp_path, ["2015-2016"], components=["demographics", "kidney"])
    located = locate(tmp_path, ("2015-2016",), ["demographics", "kidney", "day1_totals"])
    assert located.missing == [("2015-2016", "day1_totals", "DR1TOT_I.xpt")]


def test_two_files_differing_only_in_letter_case_are_refused(tmp_path):
    write_survey(tmp_path, ["2015-2016"], components=["demographics"], case="upper")
    (tmp_path / "demo_i.xpt").write_bytes((tmp_path / "DEMO_I.xpt").read_bytes())
    with pytest.raises(DataError, match="differ only in letter case"):
        locate(tmp_path, ("2015-2016",), ["demographics"])


def test_the_written_files_read_back_as_written(tmp_path):
    frames = write_survey(tmp_path, ["2015-2016"], case="upper")
    back = read_xpt(tmp_path / "KIQ_U_I.xpt")
    expected = frames["2015-2016"]["kidney"].reset_index(drop=True)
    pd.testing.assert_frame_equal(back, expected, check_dtype=False)
