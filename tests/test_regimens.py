"""Routes, steady state and partial AUC checked against outside references.

Sources beside each check:
- one-compartment closed forms for IV bolus, infusion and oral dosing and the
  superposition principle at steady state (Gibaldi & Perrier, Pharmacokinetics,
  2nd ed.; Rowland & Tozer, Clinical Pharmacokinetics and Pharmacodynamics);
- CDISC definitions: CAVG = AUCTAU/tau, fluctuation% = (CMAX - CMIN)/CAVG*100,
  swing = (CMAX - CMIN)/CMIN (shared/REFERENCES.md, seen);
- log interpolation between (48 h, 16) and (78 h, 5.0897) gives 6.39997 at 72 h
  (shared/REFERENCES.md, seen);
- partial AUCs AUC0-1.5 and AUC1.5-t for multiphasic modified release
  (Lionberger et al., Pharm Res 2012;29:1110-1120); early exposure cut at the
  reference median Tmax (FDA practice, from memory); AUC(0-72h) for long
  half-life drugs (EMA bioequivalence guideline 2010);
- hand calculations written out in the comments.
"""

import numpy as np
import pandas as pd
import pytest

import pkwidgets as pk

D, V, CL = 1000.0, 10.0, 1.0
K = CL / V


# --- IV bolus ---------------------------------------------------------------
def test_bolus_c0_and_back_extrapolated_share():
    t = np.array([0.25, 0.5, 1, 2, 4, 8, 12, 24])
    c = D / V * np.exp(-K * t)
    r = pk.nca_profile(t, c, dose=D, route="iv-bolus", auc_method="lin-up/log-down")
    # one compartment: C0 = Dose/V
    assert r["C0"] == pytest.approx(D / V, rel=1e-12)
    # AUCPBEO = area 0..t1 / AUC0-inf = C0 (1 - e^{-k t1})/k / (Dose/CL) * 100
    share = (D / V) * (1 - np.exp(-K * 0.25)) / K / (D / CL) * 100
    assert r["AUCPBEO"] == pytest.approx(share, rel=1e-12)
    assert "c0_extrapolated" in r.attrs["flags"]


def test_bolus_c0_first_observed_when_not_declining():
    # first two samples rise: no log back-extrapolation, C0 = first observation
    # (rule stated in the issue; common practice, no source)
    r = pk.nca_profile([0.5, 1, 2, 4, 8], [50, 60, 40, 20, 5], route="iv-bolus")
    assert r["C0"] == 50
    assert "c0_first_observed" in r.attrs["flags"]


def test_bolus_predose_sample_is_reported_not_used():
    t = np.array([0, 0.5, 1, 2, 4, 8, 12])
    c = np.r_[0.0, D / V * np.exp(-K * t[1:])]
    r = pk.nca_profile(t, c, dose=D, route="iv-bolus", auc_method="lin-up/log-down")
    assert r["C0"] == pytest.approx(D / V, rel=1e-12)
    assert r.attrs["sample_status"][0].startswith("IV bolus pre-dose sample")


# --- IV infusion --------------------------------------------------------------
def infusion(t, dose=D, T=2.0, cl=CL, v=V):
    # one-compartment constant-rate infusion (Gibaldi & Perrier)
    k = cl / v
    R = dose / T
    during = R / cl * (1 - np.exp(-k * np.minimum(t, T)))
    return np.where(t <= T, during, R / cl * (1 - np.exp(-k * T)) * np.exp(-k * (t - T)))


def test_infusion_closed_forms():
    T = 2.0
    t = np.r_[np.linspace(0, T, 81), np.linspace(2.5, 120, 60)]
    r = pk.nca_profile(t, infusion(t, T=T), dose=D, route="iv-infusion", duration=T,
                       auc_method="lin-up/log-down")
    # after the end of infusion the decline is mono-exponential: lambda z = k
    assert r["LAMZ"] == pytest.approx(K, rel=1e-9)
    # AUC0-inf = Dose/CL (linear rule during the infusion: dense grid, 1e-4)
    assert r["AUCIFO"] == pytest.approx(D / CL, rel=1e-4)
    assert r["CLO"] == pytest.approx(CL, rel=1e-4)
    # MRT(NCA) - T/2 = 1/k for one compartment; Vss = CL * MRT = V
    assert r["MRTIVIFO"] == pytest.approx(1 / K, rel=1e-3)
    assert r["VSSO"] == pytest.approx(V, rel=1e-3)
    assert r["TMAX"] == T


def test_infusion_needs_duration():
    with pytest.raises(ValueError, match="iv-infusion.*duration"):
        pk.nca_profile([0, 1, 2], [0, 5, 3], route="iv-infusion")


# --- steady state ------------------------------------------------------------
TAU = 12.0


def bolus_ss(t):
    # superposition: C_ss(t) = C0 e^{-kt} / (1 - e^{-k tau}) for 0 < t <= tau
    return D / V * np.exp(-K * t) / (1 - np.exp(-K * TAU))


def test_bolus_steady_state_superposition():
    t = np.array([0, 0.5, 1, 2, 4, 6, 8, 12])
    c = np.r_[bolus_ss(TAU), bolus_ss(t[1:])]  # pre-dose sample = trough C_ss(tau)
    r = pk.nca_profile(t, c, dose=D, tau=TAU, route="iv-bolus", auc_method="lin-up/log-down")
    # AUCtau,ss = single-dose AUC0-inf = Dose/CL (log rule exact)
    assert r["AUCTAU"] == pytest.approx(D / CL, rel=1e-12)
    assert r["CLTAU"] == pytest.approx(CL, rel=1e-12)
    # Cavg = Dose/(CL tau); accumulation index 1/(1 - e^{-k tau})
    assert r["CAVG"] == pytest.approx(D / (CL * TAU), rel=1e-12)
    assert r["AILAMZ"] == pytest.approx(1 / (1 - np.exp(-K * TAU)), rel=1e-12)
    assert r["CTROUGH"] == pytest.approx(bolus_ss(TAU), rel=1e-12)
    assert r["CMIN"] == pytest.approx(bolus_ss(TAU), rel=1e-12)
    # CDISC definitions: fluctuation% and swing
    assert r["FLUCP"] == pytest.approx(100 * (r["CMAX"] - r["CMIN"]) / r["CAVG"], rel=1e-12)
    assert r["SWING"] == pytest.approx((r["CMAX"] - r["CMIN"]) / r["CMIN"], rel=1e-12)


def oral_ss(t, dose=100.0, ka=1.2, ke=0.1, v=20.0, tau=TAU):
    # superposition of Bateman functions at steady state (Gibaldi & Perrier)
    a = dose * ka / (v * (ka - ke))
    return a * (np.exp(-ke * t) / (1 - np.exp(-ke * tau)) - np.exp(-ka * t) / (1 - np.exp(-ka * tau)))


def test_oral_steady_state_superposition_and_predose_rule():
    t = np.linspace(0, TAU, 241)
    r = pk.nca_profile(t, oral_ss(t), dose=100.0, tau=TAU, auc_method="lin-up/log-down")
    # AUCtau,ss = F Dose / CL with CL = ke V = 2
    assert r["AUCTAU"] == pytest.approx(100.0 / 2.0, rel=1e-4)
    assert r["CLFTAU"] == pytest.approx(2.0, rel=1e-4)
    # the pre-dose sample at time 0 is used as C(0), not replaced by 0 (rule of the issue)
    assert "time0_added" not in r.attrs["flags"]
    assert r["CTROUGH"] == pytest.approx(oral_ss(0.0), rel=1e-12)
    # without a pre-dose sample, CMIN of the interval stands in at time 0 and is flagged
    r2 = pk.nca_profile(t[1:], oral_ss(t[1:]), dose=100.0, tau=TAU)
    assert "predose_imputed" in r2.attrs["flags"]


def test_auctau_extrapolated_when_last_sample_before_tau():
    t = np.array([0, 0.5, 1, 2, 4, 6, 8])
    c = np.r_[bolus_ss(TAU), bolus_ss(t[1:])]
    r = pk.nca_profile(t, c, dose=D, tau=TAU, route="iv-bolus", auc_method="lin-up/log-down")
    # lambda z is exact, so the extrapolation to tau is exact: Dose/CL
    assert r["AUCTAU"] == pytest.approx(D / CL, rel=1e-12)
    assert "tau_extrapolated" in r.attrs["flags"]


def test_accumulation_ratios_against_superposition():
    ka, ke, v, dose = 1.2, 0.1, 20.0, 100.0
    t = np.linspace(0, TAU, 241)
    first = dose * ka / (v * (ka - ke)) * (np.exp(-ke * t) - np.exp(-ka * t))  # Bateman, first dose
    frame = pd.concat([
        pd.DataFrame({"subject": "S1", "day": 1, "time": t, "conc": first, "dose": dose}),
        pd.DataFrame({"subject": "S1", "day": 8, "time": t, "conc": oral_ss(t), "dose": dose}),
    ])
    res = pk.nca(frame, by=["subject", "day"], tau=TAU, occasion="day", auc_method="lin-up/log-down")
    # closed form: AUC0-tau after the first dose = a [(1 - e^{-ke tau})/ke - (1 - e^{-ka tau})/ka]
    a = dose * ka / (v * (ka - ke))
    auc1 = a * ((1 - np.exp(-ke * TAU)) / ke - (1 - np.exp(-ka * TAU)) / ka)
    ss = res.parameters.loc[res.parameters["day"] == 8].iloc[0]
    assert ss["ARAUC"] == pytest.approx((dose / (ke * v)) / auc1, rel=1e-3)
    assert np.isnan(res.parameters.loc[res.parameters["day"] == 1, "ARAUC"].iloc[0])
    assert ss["ARCMAX"] == pytest.approx(oral_ss(t).max() / first.max(), rel=1e-12)


def test_dose_time_makes_times_relative():
    # multiple-dose record on one clock: dose at 168 h, samples after it
    t_rel = np.array([0, 0.5, 1, 2, 4, 8, 12])
    c = np.r_[bolus_ss(TAU), bolus_ss(t_rel[1:])]
    frame = pd.DataFrame({"subject": 1, "time": 168 + t_rel, "conc": c, "dose": D, "dose_time": 168.0})
    res = pk.nca(frame, by="subject", dose_time="dose_time", tau=TAU, route="iv-bolus",
                 auc_method="lin-up/log-down")
    assert res.parameters["AUCTAU"].iloc[0] == pytest.approx(D / CL, rel=1e-12)  # superposition, as above


# --- partial AUC ----------------------------------------------------------------
T_MONO = np.array([0.5, 1, 2, 4, 6, 8, 12, 24.0])
C_MONO = 100 * np.exp(-0.1 * T_MONO)


def test_partial_auc_exact_for_monoexponential_with_log_interpolation():
    # integral of 100 e^{-0.1 t} from 1.5 to 10 = 1000 (e^{-0.15} - e^{-1})
    exact = 1000 * (np.exp(-0.15) - np.exp(-1.0))
    got = pk.partial_auc(T_MONO, C_MONO, 1.5, 10, auc_method="lin-up/log-down", route="iv-bolus")
    assert got == pytest.approx(exact, rel=1e-12)


def test_partial_auc_beyond_tlast_uses_lambda_z():
    exact = 1000 * (np.exp(-2.0) - np.exp(-3.0))
    r = pk.nca_profile(T_MONO, C_MONO, route="iv-bolus", auc_method="lin-up/log-down", partial=[(20, 30)])
    assert r["AUCINT_20-30"] == pytest.approx(exact, rel=1e-12)
    assert "partial_extrapolated" in r.attrs["flags"]


def test_partial_auc_linear_interpolation_by_hand():
    # hand calculation: c(0.5) = 5, c(3) = 6; 0.5*(5+10)/2 + (10+8)/2 + (8+6)/2 = 19.75
    assert pk.partial_auc([0, 1, 2, 4], [0, 10, 8, 4], 0.5, 3) == pytest.approx(19.75, rel=1e-15)


def test_log_interpolation_reference_value():
    # REFERENCES.md (seen): log interpolation between (48 h, 16) and (78 h, 5.0897) is 6.39997 at 72 h
    from pkwidgets.auc import area_to
    _, c72 = area_to(np.array(72.0), 48.0, 16.0, 78.0, 5.0897, np.array(True))
    assert float(c72) == pytest.approx(6.39997, abs=5e-6)


def test_lionberger_partial_areas_add_up():
    # Lionberger et al. 2012: AUC0-1.5 h and AUC1.5-t for multiphasic MR products;
    # the two partial areas add up to AUCLST (additivity of the integral)
    t = np.array([0, 0.25, 0.5, 1, 1.25, 2, 3, 4, 6, 8, 12, 16, 24])
    c = np.array([0, 3.1, 5.2, 6.0, 5.1, 6.8, 7.4, 6.1, 4.0, 2.9, 1.5, 0.8, 0.2])
    for method in ("linear", "lin-up/log-down", "lin-log"):
        r = pk.nca_profile(t, c, auc_method=method, partial=[(0, 1.5), (1.5, 24)])
        assert r["AUCINT_0-1.5"] + r["AUCINT_1.5-24"] == pytest.approx(r["AUCLST"], rel=1e-12)


def test_early_exposure_cut_at_reference_median_tmax():
    # FDA practice (from memory): early exposure AUC0-Tmax,ref with Tmax,ref the
    # reference product's median Tmax; per-profile ends need named intervals.
    frame = pd.DataFrame({
        "subject": np.repeat([1, 2, 3], 6),
        "time": np.tile([0, 0.5, 1, 2, 4, 8], 3),
        "conc": [0, 4, 9, 7, 3, 1, 0, 6, 8, 7, 4, 1, 0, 2, 5, 9, 5, 2],
    })
    tmax_ref = 1.5  # median reference Tmax, taken as given
    res = pk.nca(frame, by="subject", dose=None, partial={"AUCINT_early": (0, tmax_ref)})
    # hand calculation, subject 1: 0.5*4/2 + 0.5*(4+9)/2 + 0.5*(9+8)/2 with c(1.5) = 8
    assert res.profile(1).parameters["AUCINT_early"] == pytest.approx(1 + 3.25 + 4.25, rel=1e-15)


def test_ema_truncated_auc_0_72():
    # EMA 2010: AUC(0-72h) may replace AUC(0-inf) for long half-life drugs; 72 h falls
    # between samples and is interpolated (log rule on the declining segment)
    t = np.array([0, 1, 2, 4, 8, 24, 48, 96, 144])
    k = np.log(2) / 60
    c = np.r_[0, 50 * np.exp(-k * t[1:])]
    r = pk.nca_profile(t, c, auc_method="lin-up/log-down", partial=[(0, 72)])
    exact_24_72 = 50 / k * (np.exp(-k * 24) - np.exp(-k * 72))
    head = pk.partial_auc(t, c, 0, 24, auc_method="lin-up/log-down")
    assert r["AUCINT_0-72"] - head == pytest.approx(exact_24_72, rel=1e-12)


def test_predose_sample_before_dose_time_at_steady_state():
    # Rule of the issue: at steady state a pre-dose concentration is used as the
    # value at time 0 (not replaced by 0) and the rule is reported.  A pre-dose
    # sample drawn 0.25 h before the dose must give the same areas as the same
    # value placed at time 0 (identity of the rule, common practice, no source).
    t = np.linspace(0, TAU, 49)[1:]
    c = oral_ss(t)
    trough = oral_ss(TAU - 0.25)  # superposition: the level 0.25 h before the next dose
    shifted = pk.nca_profile(np.r_[-0.25, t], np.r_[trough, c], dose=100.0, tau=TAU)
    at_zero = pk.nca_profile(np.r_[0.0, t], np.r_[trough, c], dose=100.0, tau=TAU)
    for code in ("AUCTAU", "CTROUGH", "CMIN", "CAVG", "AUCLST"):
        assert shifted[code] == pytest.approx(at_zero[code], rel=1e-15), code
    assert "predose_shifted" in shifted.attrs["flags"]
    assert shifted.attrs["sample_status"][0] == "used"


def test_single_dose_predose_before_dose_time_is_checked_not_used():
    # EMA 2010: a pre-dose concentration above 5 % of Cmax is flagged for review;
    # the pre-dose sample (t < 0) is not used in the areas, and C(0) = 0 is added.
    t = np.array([-0.5, 0.5, 1, 2, 4, 8, 12])
    c = np.array([0.7, 6.0, 10.0, 8.0, 5.0, 2.0, 1.0])
    r = pk.nca_profile(t, c)
    assert "predose_high" in r.attrs["flags"]
    assert r.attrs["sample_status"][0].startswith("sampled before the dose")
    from scipy.integrate import trapezoid  # reference library
    assert r["AUCLST"] == pytest.approx(trapezoid(np.r_[0, c[1:]], np.r_[0, t[1:]]), rel=1e-15)


def test_partial_names_must_be_aucint():
    # CDISC: a partial area is AUCINT (shared/REFERENCES.md, seen); other names are refused
    with pytest.raises(ValueError, match="partial interval name 'early' must start with 'AUCINT'"):
        pk.nca_profile([0, 1, 2], [0, 5, 3], partial={"early": (0, 1)})


def test_steady_state_predose_sample_only_within_the_window():
    # steady state by superposition of a one-compartment oral dose every tau (Gibaldi & Perrier, from memory):
    # a sample 11 h before the dose (1 h after the previous dose) is no trough; one 0.5 h before it is.
    # The window (10 % of tau) is common practice, no source.
    tau, ka, k = 12.0, 1.5, 0.12

    def css(t):  # concentration at time t after a dose, at steady state
        t = np.mod(t, tau)
        return 10 * ka / (ka - k) * (np.exp(-k * t) / (1 - np.exp(-k * tau)) - np.exp(-ka * t) / (1 - np.exp(-ka * tau)))

    t = np.array([0.5, 1, 2, 4, 6, 8, 12.0])
    early = pk.nca_profile(np.r_[-11.0, t], css(np.r_[-11.0, t]), tau=tau)
    assert early.attrs["sample_status"][0].startswith("steady state: pre-dose sample taken earlier")
    assert "predose_imputed" in early.attrs["flags"] and "predose_shifted" not in early.attrs["flags"]
    assert early["CMIN"] == pytest.approx(css(t).min(), rel=1e-12)
    late = pk.nca_profile(np.r_[-0.5, t], css(np.r_[-0.5, t]), tau=tau)
    assert "predose_shifted" in late.attrs["flags"] and late.attrs["sample_status"][0] == "used"
    assert late["CMIN"] == pytest.approx(min(css(-0.5), css(t).min()), rel=1e-12)
    wide = pk.nca_profile(np.r_[-11.0, t], css(np.r_[-11.0, t]), tau=tau, options=pk.NCAOptions(predose_window=1.0))
    assert "predose_shifted" in wide.attrs["flags"]


def test_first_occasion_has_nothing_before_its_dose():
    # a multiple-dose study with day 1 and day 5, no sample at dose time: after the first dose the concentration
    # at dose time is 0 for an oral dose (nothing was given before; one-compartment Bateman curve, Gibaldi &
    # Perrier, from memory), so CMIN of day 1 is 0 and AUCTAU is the single-dose area over [0, tau], here the
    # linear trapezoid from (0, 0) computed with scipy; day 5 has no such knowledge (CMIN of the interval).
    from scipy.integrate import trapezoid

    tau, ka, k = 12.0, 1.5, 0.12
    t = np.array([0.5, 1, 2, 4, 6, 8, 12.0])
    day1 = 10 * ka / (ka - k) * (np.exp(-k * t) - np.exp(-ka * t))
    rows = [dict(subject=1, day=d, time=ti, conc=ci * (1.0 if d == 1 else 1.6), dose=100)
            for d in (1, 5) for ti, ci in zip(t, day1)]
    res = pk.nca(pd.DataFrame(rows), by=["subject", "day"], tau=tau, occasion="day")
    first, later = res.profile((1, 1)), res.profile((1, 5))
    assert first.parameters["CMIN"] == 0.0
    assert "time0_added" in set(first.flags["flag"]) and "predose_imputed" not in set(first.flags["flag"])
    assert first.parameters["AUCTAU"] == pytest.approx(trapezoid(np.r_[0.0, day1], np.r_[0.0, t]), rel=1e-12)
    assert later.parameters["CMIN"] == pytest.approx(1.6 * day1.min(), rel=1e-12)
    assert "predose_imputed" in set(later.flags["flag"])


def test_steady_state_volume_and_dose_normalised_area():
    # one-compartment oral dosing every tau, at steady state (superposition; Gibaldi & Perrier, from memory):
    # AUCtau = F*Dose/CL and the terminal rate is k, so Dose/(lambda_z*AUCtau) = CL/k = V, and AUCtau/Dose = 1/CL.
    # Dense sampling with the log-down rule makes the NCA areas close to the exact ones.
    tau, ka, dose, v, cl = 24.0, 2.0, 100.0, 10.0, 1.0
    k = cl / v
    t = np.linspace(0.0, tau, 241)
    c = dose / v * ka / (ka - k) * (np.exp(-k * t) / (1 - np.exp(-k * tau)) - np.exp(-ka * t) / (1 - np.exp(-ka * tau)))
    r = pk.nca_profile(t, c, dose=dose, tau=tau, auc_method="lin-up/log-down", terminal=(12.0, 24.0))
    assert r["AUCTAU"] == pytest.approx(dose / cl, rel=1e-3)
    assert r["AUCTAUD"] == pytest.approx(r["AUCTAU"] / dose, rel=1e-15)  # CDISC: AUCTAU normalised by dose
    assert r["VZFTAU"] == pytest.approx(v, rel=1e-3)
    assert "VZTAU" not in r.index  # intravascular only
