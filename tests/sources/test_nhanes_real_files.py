"""For users who have the real files: KIQ026 answer counts per cycle against the codebooks.

Set the environment variable COHORTSTONE_NHANES_DIR to a folder of the publisher's files
(`cohortstone fetch --cycles 2007-2008,... --components demographics,kidney DIR` downloads
them). This is the only place cohortstone reads an environment variable, and only in this
test. Without it the test is skipped, loudly.

Expected values: the unweighted frequencies of the codebooks (CDC NHANES Data Documentation,
Codebook and Frequencies, Kidney Conditions – Urology, KIQ_U_E … KIQ_U_J and P_KIQ_U), as
copied into domain.md §1 [CB-E][CB-F][CB-G][CB-H][CB-I][CB-J][CB-P].
"""
from __future__ import annotations

import os
from pathlib import Path

import pytest

from cohortstone.config.spec import DataSpec
from cohortstone.sources import nhanes
from cohortstone.sources.nhanes.cycles import COMPONENTS, CYCLES

VARIABLE = "COHORTSTONE_NHANES_DIR"
NOT_RUN = (f"REAL-FILE CHECK DID NOT RUN: set {VARIABLE} to a folder of the survey's files to "
           "compare KIQ026 answer counts with the published codebook frequencies")

# cycle: (N adults 20+ in the file, KIQ026 yes, no, refused, don't know, missing) [CB-*]
KIQ026 = {
    "2007-2008": (5935, 539, 5370, 0, 26, 0),
    "2009-2010": (6218, 542, 5659, 0, 17, 0),
    "2011-2012": (5560, 458, 5090, 1, 10, 1),
    "2013-2014": (5769, 535, 5223, 0, 11, 0),
    "2015-2016": (5719, 606, 5099, 0, 14, 0),
    "2017-2018": (5569, 554, 5004, 0, 11, 0),
    "2017-2020": (9232, 866, 8342, 0, 24, 0),
}
# KIQ029 yes / no / don't know [CB-I][CB-J][CB-P]
KIQ029 = {"2015-2016": (88, 517, 1), "2017-2018": (96, 450, 8), "2017-2020": (141, 710, 15)}


def real_folder(cycle: str) -> Path:
    value = os.environ.get(VARIABLE)
    if not value:
        pytest.skip(NOT_RUN)
    folder = Path(value)
    assert folder.is_dir(), f"{VARIABLE} points at {value!r}, which is not a folder"
    names = {p.stem.upper() for p in folder.iterdir()}
    for component in ("demographics", "kidney"):
        stem = CYCLES[cycle].file_stem(COMPONENTS[component])
        if stem not in names:
            pytest.skip(f"{stem}.xpt is not in {folder}: {cycle} was not checked")
    return folder


@pytest.mark.parametrize("cycle", list(KIQ026))
def test_kiq026_answer_counts_match_the_codebook(cycle):
    folder = real_folder(cycle)
    spec = DataSpec(source="nhanes", dir=folder, cycles=(cycle,), cache=None)
    frame, record = nhanes.load(spec, ["stone_ever", "stone_past_year", "age_years"])
    n, yes, no, refused, dont_know, missing = KIQ026[cycle]
    # the file as published (the codebook's frequency table)
    assert record["rows"][cycle]["kidney"] == n
    assert record["answers"][cycle]["KIQ026"] == {
        **({"1": yes} if yes else {}), **({"2": no} if no else {}),
        **({"7": refused} if refused else {}), **({"9": dont_know} if dont_know else {}),
        "missing": missing}
    # and after harmonization: yes -> 1, no -> 0, refused and don't know counted, then missing
    assert int((frame["stone_ever"] == 1).sum()) == yes
    assert int((frame["stone_ever"] == 0).sum()) == no
    codes = {c["code"]: c["rows"] for c in record["missing_codes"] if c["variable"] == "KIQ026"}
    assert codes == {7: refused, 9: dont_know}
    if cycle in KIQ029:
        k_yes, k_no, k_dont_know = KIQ029[cycle]
        answers = record["answers"][cycle]["KIQ029"]
        assert (answers.get("1", 0), answers.get("2", 0), answers.get("9", 0)) == KIQ029[cycle]
        assert int((frame["stone_past_year"] == 1).sum()) == k_yes


def test_the_check_itself_on_invented_files_holding_the_published_counts(tmp_path,
                                                                         monkeypatch):
    """The comparison above, run on INVENTED 2015-2016 files built to hold exactly the
    codebook's counts, so the check is known to work before anyone points it at real files."""
    import numpy as np
    import pandas as pd
    pyreadstat = pytest.importorskip("pyreadstat")
    n, yes, no, refused, dont_know, missing = KIQ026["2015-2016"]
    k_yes, k_no, k_dont_know = KIQ029["2015-2016"]
    seqn = np.arange(83732, 83732 + n, dtype=float)
    kiq026 = np.repeat([1.0, 2.0, 7.0, 9.0, np.nan], [yes, no, refused, dont_know, missing])
    kiq029 = np.full(n, np.nan)
    kiq029[:k_yes + k_no + k_dont_know] = np.repeat([1.0, 2.0, 9.0], [k_yes, k_no, k_dont_know])
    demo = pd.DataFrame({"SEQN": seqn, "SDDSRVYR": 9.0, "RIAGENDR": 1.0, "RIDAGEYR": 40.0,
                         "RIDRETH1": 3.0, "WTINT2YR": 1000.0, "SDMVSTRA": 1.0 + seqn % 2,
                         "SDMVPSU": 1.0 + (seqn // 2) % 2})
    kidney = pd.DataFrame({"SEQN": seqn, "KIQ026": kiq026, "KIQ029": kiq029})
    pyreadstat.write_xport(demo, str(tmp_path / "DEMO_I.xpt"), file_format_version=5)
    pyreadstat.write_xport(kidney, str(tmp_path / "KIQ_U_I.xpt"), file_format_version=5)
    monkeypatch.setenv(VARIABLE, str(tmp_path))
    test_kiq026_answer_counts_match_the_codebook("2015-2016")
