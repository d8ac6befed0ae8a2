"""Sampling design (pkwidgets.design*): model curves, exact values and schedule evaluation.

Sources of the check values:
- ``scipy.integrate.solve_ivp`` of the compartment ODEs (mass balance, written in the test) for the
  model curves, including the two-compartment macro-constants and repeated doses given as events;
- ``scipy.integrate.quad`` of the model curve for every closed-form area;
- ``scipy.optimize.minimize_scalar`` (bounded) for the true TMAX and CMAX;
- one-compartment identities (Gibaldi & Perrier, Pharmacokinetics, 2nd ed., from memory; listed in
  shared/REFERENCES.md): AUC0-inf = F*Dose/CL; tmax = ln(ka/k)/(ka - k); at steady state
  AUCtau = F*Dose/CL and accumulation 1/(1 - e^(-k tau)); alpha + beta = k10 + k12 + k21 and
  alpha * beta = k10 * k21 (roots of the characteristic quadratic, from memory);
- the log trapezoid is exact on a mono-exponential, the linear one overestimates a convex decline
  (common practice, no source); its size per segment, h(c1 + c2)/2 = (c1 - c2)/k * (kh/2) coth(kh/2),
  follows from the closed form (c2 = c1 e^(-kh));
- EMA 2010 bioequivalence guideline: AUCPEO above 20 % counted;
- ``scipy.stats`` (Kolmogorov-Smirnov test, normal CDF) for the simulated variability and error;
  ``statistics.quantiles(method="inclusive")`` (Hyndman & Fan type 7) for the summary percentiles.
"""

from __future__ import annotations

import math
import statistics

import numpy as np
import pytest
from scipy import stats
from scipy.integrate import quad, solve_ivp
from scipy.optimize import minimize_scalar

import pkwidgets as pk
from pkwidgets.design import DESIGN_CODES
from pkwidgets.design_curves import concentration, cumulative_auc, disposition, exact_values, true_peak
from pkwidgets.design_models import draw_subjects

ROUTES = {
    "bolus": dict(route="iv-bolus"),
    "infusion": dict(route="iv-infusion", duration=1.5),
    "oral-lag": dict(route="extravascular", ka=1.3, lag=0.4, f=0.7),
    "flip-flop": dict(route="extravascular", ka=0.03),
}
SHAPES = {"1-cpt": {}, "2-cpt": dict(q=4.0, v2=60.0)}
DOSING = {"single": {}, "3 doses": dict(tau=12.0, doses=3), "steady": dict(tau=12.0, doses="steady-state")}


def model(route="bolus", shape="1-cpt", dosing="single", **kw):
    return pk.CompartmentModel(dose=100.0, cl=5.0, v=40.0, **ROUTES[route], **SHAPES[shape], **DOSING[dosing], **kw)


def typical(m):
    return draw_subjects(m, 1, np.random.default_rng(0))  # no variability: the typical subject


# ---------------------------------------------------------------------------- the model curve

def ode_curve(m, t_eval):
    """Central concentration from the ODEs, doses at -(n-1)tau ... 0 as events (solve_ivp, tight tolerances)."""
    cl, v, ka = m.cl, m.v, m.ka or 0.0
    q, v2 = (m.q, m.v2) if m.q else (0.0, 1.0)
    k10, k12, k21 = cl / v, q / v, q / v2
    n = m.doses if m.doses != "steady-state" else 60  # 60 intervals: e^(-beta*60*12) ~ 1e-10 (beta 0.032/h), far below rtol
    tau = m.tau or 0.0
    starts = [-(n - 1 - j) * tau for j in range(n)]
    rate = lambda t: sum(m.dose / m.duration for s in starts if s <= t < s + m.duration) if m.duration else 0.0

    def rhs(t, y):
        g, a1, a2 = y
        return [-ka * g, ka * g + rate(t) - (k10 + k12) * a1 + k21 * a2, k12 * a1 - k21 * a2]

    y = np.zeros(3)
    events = sorted({s + (m.lag or 0.0) for s in starts} | ({s + m.duration for s in starts} if m.duration else set()))
    grid = sorted(set(events) | {float(max(t_eval)) + 1e-9})
    out = np.empty(len(t_eval))
    t0 = grid[0]
    for t1 in grid:
        if t1 > t0:
            sol = solve_ivp(rhs, (t0, t1), y, method="LSODA", rtol=1e-11, atol=1e-14, dense_output=True)
            y = sol.y[:, -1]
            inside = (t_eval > t0) & (t_eval <= t1)
            if inside.any():
                out[inside] = sol.sol(t_eval[inside])[1] / v
            t0 = t1
        if any(abs(t1 - (s + (m.lag or 0.0))) < 1e-12 for s in starts) and m.route != "iv-infusion":
            y = y + ([m.f * m.dose, 0, 0] if m.route == "extravascular" else [0, m.dose, 0])
    return out


@pytest.mark.parametrize("dosing", list(DOSING))
@pytest.mark.parametrize("shape", list(SHAPES))
@pytest.mark.parametrize("route", ["bolus", "infusion", "oral-lag"])
def test_curve_matches_ode(route, shape, dosing):
    # scipy.integrate.solve_ivp of the mass-balance ODEs; repeated doses as events (superposition check)
    m = model(route, shape, dosing)
    t = np.array([0.1, 0.5, 1.0, 1.49, 2.0, 3.0, 6.0, 11.9, 24.0, 48.0])
    np.testing.assert_allclose(concentration(m, typical(m), t)[0], ode_curve(m, t), rtol=2e-7)


def test_two_compartment_macro_constants():
    # roots of s^2 - (k10 + k12 + k21) s + k10 k21 = 0 (from memory); a_alpha + a_beta = 1/V (C(0) = Dose/V)
    p = typical(model("bolus", "2-cpt"))
    a, lam = disposition(p)
    k10, k12, k21 = 5.0 / 40.0, 4.0 / 40.0, 4.0 / 60.0
    assert lam[0, 0] + lam[0, 1] == pytest.approx(k10 + k12 + k21, rel=1e-14)
    assert lam[0, 0] * lam[0, 1] == pytest.approx(k10 * k21, rel=1e-14)
    assert a.sum() == pytest.approx(1 / 40.0, rel=1e-14)
    assert (a[0] / lam[0]).sum() == pytest.approx(1 / 5.0, rel=1e-14)  # AUC of h = 1/CL


@pytest.mark.parametrize("dosing", list(DOSING))
@pytest.mark.parametrize("shape", list(SHAPES))
@pytest.mark.parametrize("route", list(ROUTES))
def test_areas_match_quad(route, shape, dosing):
    # scipy.integrate.quad of the model curve; single dose: AUC0-inf = F*Dose/CL (Gibaldi & Perrier)
    m = model(route, shape, dosing)
    p = typical(m)
    curve = lambda x: concentration(m, p, np.array([x]))[0, 0]
    bends = [0.4, 1.5]
    for end in (0.3, 1.0, 7.5, 30.0):
        ref = quad(curve, 0.0, end, points=[b for b in bends if b < end], limit=200, epsabs=0, epsrel=1e-12)[0]
        assert cumulative_auc(m, p, np.array([end]))[0, 0] == pytest.approx(ref, rel=1e-10)
    ex = exact_values(m, p)
    tail = quad(curve, 60.0, np.inf, limit=400, epsabs=0, epsrel=1e-12)[0]
    assert ex["AUCIFO"][0] == pytest.approx(cumulative_auc(m, p, np.array([60.0]))[0, 0] + tail, rel=1e-9)
    if dosing == "single":
        assert ex["AUCIFO"][0] == pytest.approx(m.f * m.dose / m.cl, rel=1e-12)


@pytest.mark.parametrize("shape", list(SHAPES))
@pytest.mark.parametrize("route", list(ROUTES))
def test_steady_state_superposition(route, shape):
    # steady state = the sum of single-dose curves over all earlier doses; AUCtau,ss = F*Dose/CL
    ss, one = model(route, shape, "steady"), model(route, shape, "single")
    p = typical(ss)
    t = np.linspace(0.0, 12.0, 25)
    summed = sum(concentration(one, p, t + j * 12.0)[0] for j in range(250))  # slowest rate 0.03/h: e^(-0.03*12*250) ~ 1e-39
    np.testing.assert_allclose(concentration(ss, p, t)[0], summed, rtol=1e-11)
    assert exact_values(ss, p)["AUCTAU"][0] == pytest.approx(one.f * one.dose / one.cl, rel=1e-12)


def test_accumulation_ratio_one_compartment_bolus():
    # accumulation index 1/(1 - e^(-k tau)) (Gibaldi & Perrier, from memory)
    ss, one = model("bolus", dosing="steady"), model("bolus")
    p = typical(ss)
    ratio = concentration(ss, p, [0.0])[0, 0] / concentration(one, p, [0.0])[0, 0]
    assert ratio == pytest.approx(1 / (1 - math.exp(-5 / 40 * 12)), rel=1e-13)


@pytest.mark.parametrize("dosing", list(DOSING))
@pytest.mark.parametrize("shape", list(SHAPES))
@pytest.mark.parametrize("route", list(ROUTES))
def test_true_peak_matches_minimize_scalar(route, shape, dosing):
    # scipy.optimize.minimize_scalar (bounded) on the curve over [0, tau] or [0, 100]
    m = model(route, shape, dosing)
    p = typical(m)
    curve = lambda x: concentration(m, p, np.array([x]))[0, 0]
    hi = m.tau if m.tau else 100.0
    lo = m.lag
    ref = minimize_scalar(lambda x: -curve(x), bounds=(lo, hi), method="bounded", options={"xatol": 1e-10})
    cmax, tmax = true_peak(m, p)
    if route == "bolus":
        assert tmax[0] == 0.0 and cmax[0] == pytest.approx(curve(0.0), rel=1e-14)
        return
    assert cmax[0] >= -ref.fun * (1 - 1e-12)
    assert tmax[0] == pytest.approx(ref.x, rel=1e-5)
    if route == "infusion":
        assert tmax[0] == m.duration


def test_one_compartment_tmax_closed_form():
    # tmax = ln(ka/k)/(ka - k) + lag (Gibaldi & Perrier, from memory)
    m = model("oral-lag")
    k, ka = 5 / 40, 1.3
    assert true_peak(m, typical(m))[1][0] == pytest.approx(0.4 + math.log(ka / k) / (ka - k), rel=1e-14)


@pytest.mark.parametrize(("route", "shape", "rate"), [
    ("bolus", "2-cpt", None), ("oral-lag", "1-cpt", 5 / 40), ("flip-flop", "1-cpt", 0.03)])
def test_terminal_half_life(route, shape, rate):
    # slope of ln C at late times (numerical, numpy.gradient) = the slowest exponent, ka under flip-flop
    m = model(route, shape)
    p = typical(m)
    t = np.linspace(400.0, 401.0, 11)
    slope = np.gradient(np.log(concentration(m, p, t)[0]), t)[5]
    if rate is None:
        rate = disposition(p)[1][0, 1]
    assert exact_values(m, p)["LAMZHL"][0] == pytest.approx(math.log(2) / -slope, rel=1e-6)
    assert exact_values(m, p)["LAMZHL"][0] == pytest.approx(math.log(2) / rate, rel=1e-12)


# ---------------------------------------------------------------------------- simulation

def test_variability_and_residual_error_follow_the_model():
    # scipy.stats.kstest of the standardised log-parameters and residuals against N(0, 1)
    m = pk.CompartmentModel(route="iv-bolus", dose=100, cl=5, v=40, variability={"cl": 0.3, "v": 0.2},
                            proportional_error=0.1, lloq=1e-12)
    s = pk.simulate_profiles(m, [0.5, 1, 2, 4], 20_000, seed=11)
    assert stats.kstest(np.log(s.subjects["cl"] / 5) / 0.3, "norm").pvalue > 1e-3
    assert stats.kstest(np.log(s.subjects["v"] / 40) / 0.2, "norm").pvalue > 1e-3
    assert stats.kstest(((s.conc / s.true_conc - 1) / 0.1).ravel(), "norm").pvalue > 1e-3


def test_censoring_share_matches_normal_cdf():
    # P(C (1 + 0.2 z) + 0.05 z' < LLOQ) from scipy.stats.norm.cdf, against the simulated share (binomial 5 SD)
    m = pk.CompartmentModel(route="iv-bolus", dose=100, cl=5, v=40, proportional_error=0.2, additive_error=0.05,
                            lloq=0.3)
    s = pk.simulate_profiles(m, [4, 12, 20, 28], 40_000, seed=5)
    c = s.true_conc[0]
    p = stats.norm.cdf((0.3 - c) / np.sqrt((0.2 * c) ** 2 + 0.05 ** 2))
    share = s.blq.mean(axis=0)
    assert np.all(np.abs(share - p) <= 5 * np.sqrt(p * (1 - p) / 40_000) + 1e-12)
    assert np.all(np.isnan(s.conc[s.blq])) and not np.any(np.isnan(s.conc[~s.blq]))


# ---------------------------------------------------------------------------- NCA against the exact values

def test_log_down_exact_on_monoexponential():
    # the log trapezoid is exact on a mono-exponential; lambda z is k exactly (common practice, no source)
    m = pk.CompartmentModel(route="iv-bolus", dose=1000, cl=1, v=10, variability={"cl": 0.3, "v": 0.3})
    r = pk.evaluate_schedule(m, {"log": [0.5, 1, 2, 4, 6, 8, 12, 24]}, n=2000, seed=2,
                             auc_method="lin-up/log-down", progress=False, keep_errors=True)
    e = r.errors["log"]
    for code in ("AUCLST", "AUCIFO", "LAMZHL"):
        assert np.abs(e[code]).max() < 1e-11, code


def test_dense_sampling_converges_to_exact_auc():
    # oral two-compartment: NCA on ever denser schedules approaches the closed-form AUC
    m = model("oral-lag", "2-cpt")
    worst = []
    for points in (12, 48, 400):
        times = np.r_[0.0, np.geomspace(0.05, 96.0, points)]
        r = pk.evaluate_schedule(m, {"s": times}, n=3, seed=1, auc_method="lin-up/log-down", progress=False,
                                 keep_errors=True)
        worst.append(np.abs(r.errors["s"]["AUCLST"]).max())
    assert worst[0] > worst[1] > worst[2] and worst[2] < 1e-5


def test_linear_rule_bias_positive_and_sized_by_closed_form():
    # linear trapezoid on C0 e^(-kt): each segment is (c1 - c2)/k * x coth(x), x = kh/2 > 0, so bias > 0
    k, times = 0.1, np.array([0.5, 1, 2, 4, 6, 8, 12, 24.0])
    m = pk.CompartmentModel(route="iv-bolus", dose=1000, cl=1, v=10)
    r = pk.evaluate_schedule(m, {"linear": times}, n=5, seed=3, auc_method="linear", progress=False)
    edges = np.r_[0.0, times]
    c = 100 * np.exp(-k * edges)
    x = k * np.diff(edges) / 2
    expected = np.sum((c[:-1] - c[1:]) / k * x / np.tanh(x)) / (100 * (1 - math.exp(-k * 24)) / k) - 1
    row = r.summary.set_index("PPTESTCD").loc["AUCLST"]
    assert expected > 0 and row["median_pct"] > 0
    assert row["median_pct"] == pytest.approx(100 * expected, rel=1e-9)
    assert row["p05_pct"] == pytest.approx(row["p95_pct"], rel=1e-12)  # no variability: no spread


@pytest.mark.parametrize(("last", "flagged"), [(12.0, 100.0), (24.0, 0.0)])
def test_share_above_20_percent_extrapolated(last, flagged):
    # exact extrapolated share e^(-k t_last): 30 % at 12 h, 9 % at 24 h (k = 0.1); EMA 2010 limit 20 %
    m = pk.CompartmentModel(route="iv-bolus", dose=1000, cl=1, v=10)
    r = pk.evaluate_schedule(m, [np.arange(1.0, last + 1)], n=10, seed=1, auc_method="lin-up/log-down",
                             progress=False)
    assert r.table.loc[0, "AUCPEO > 20 % (%)"] == flagged
    assert r.flags.loc["schedule 1", "extrapolation_high"] == flagged


def test_same_subjects_on_every_schedule_and_percentiles():
    # no residual error: two schedules with equal times see the same subjects, hence equal errors;
    # percentiles as statistics.quantiles(method="inclusive") (type 7)
    m = model("oral-lag", variability={"cl": 0.3, "ka": 0.5})
    times = [0, 0.5, 1, 2, 3, 4, 6, 8, 12, 24]
    r = pk.evaluate_schedule(m, {"a": times, "b": times, "short": times[:7]}, n=3000, seed=4, block_size=1000,
                             progress=False, keep_errors=True)
    assert r.errors["a"].equals(r.errors["b"])
    assert not r.errors["a"].equals(r.errors["short"])
    e = r.errors["short"]["CMAX"].dropna().tolist()
    cuts = statistics.quantiles(e, n=20, method="inclusive")
    row = r.summary.set_index(["schedule", "PPTESTCD"]).loc[("short", "CMAX")]
    assert row["p05_pct"] == pytest.approx(100 * cuts[0], rel=1e-12)
    assert row["p95_pct"] == pytest.approx(100 * cuts[-1], rel=1e-12)
    assert row["median_pct"] == pytest.approx(100 * statistics.median(e), rel=1e-12)


def test_result_does_not_depend_on_workers_and_progress_is_shown(capsys):
    m = model("infusion", "2-cpt", "steady", variability={"cl": 0.2}, proportional_error=0.1, lloq=0.01)
    kw = dict(schedules={"s": [0, 1, 1.5, 2, 4, 8, 12]}, n=900, seed=9, block_size=200)
    one = pk.evaluate_schedule(m, workers=1, progress=True, **kw)
    assert "5/5" in capsys.readouterr().err  # tqdm bar: 5 blocks (4 x 200 + 100 subjects) x 1 schedule
    two = pk.evaluate_schedule(m, workers=2, progress=False, **kw)
    assert one.table.equals(two.table) and one.flags.equals(two.flags)
    assert "AUCTAU" in set(one.summary["PPTESTCD"])


def test_plot_has_a_panel_per_parameter():
    import matplotlib

    matplotlib.use("Agg")
    m = model("oral-lag", variability={"cl": 0.3})
    r = pk.evaluate_schedule(m, {"a": [0, 1, 2, 4, 8, 24], "b": [0, 2, 8, 24]}, n=200, seed=1, progress=False)
    fig = r.plot()
    titles = [ax.get_title() for ax in fig.axes if ax.get_visible()]
    assert titles[:5] == [f"{c}: relative error (%)" for c in DESIGN_CODES]
    assert titles[5] == "profiles with AUCPEO > 20 % (%)"


# ---------------------------------------------------------------------------- bad input

@pytest.mark.parametrize(("kwargs", "message"), [
    (dict(route="oral"), r"'route' option of CompartmentModel must be one of"),
    (dict(route="extravascular"), r"needs 'ka'"),
    (dict(route="iv-infusion"), r"needs 'duration'"),
    (dict(cl=-1), r"'cl' option of CompartmentModel must be a finite positive number; got -1"),
    (dict(q=2.0), r"needs both 'q' and 'v2'"),
    (dict(doses=3), r"needs 'tau'"),
    (dict(doses=0, tau=12), r"'doses' option .* whole number >= 1 or 'steady-state'; got 0"),
    (dict(route="iv-infusion", duration=14, tau=12, doses=2), r"duration=14.0 must stay below tau=12.0"),
    (dict(variability={"ka": 0.3}), r"variability names 'ka', which is not a parameter of this model"),
    (dict(variability={"cl": -0.3}), r"variability\['cl'\]"),
    (dict(route="iv-bolus", lag=1.0), r"apply to the extravascular route only"),
])
def test_bad_model(kwargs, message):
    with pytest.raises(ValueError, match=message):
        pk.CompartmentModel(**{"dose": 100, "cl": 5, "v": 40, "route": "iv-bolus", **kwargs})


@pytest.mark.parametrize(("schedules", "message"), [
    ({"a": [0, 2, 1]}, r"schedule 'a' must have strictly increasing times"),
    ({"a": [0, 1, 1]}, r"strictly increasing"),
    ({"b": [-1, 1]}, r"schedule 'b' must be a list of finite sampling times >= 0"),
    ({"c": "0, 1, 2"}, r"schedule 'c' must be a list"),
    ({}, r"at least one schedule"),
])
def test_bad_schedule(schedules, message):
    with pytest.raises(ValueError, match=message):
        pk.evaluate_schedule(model(), schedules, n=10, progress=False)


def test_bad_n_and_model_type():
    with pytest.raises(ValueError, match=r"n must be a whole number of subjects >= 1; got 0"):
        pk.evaluate_schedule(model(), {"a": [1, 2]}, n=0, progress=False)
    with pytest.raises(TypeError, match=r"model must be a CompartmentModel; got dict"):
        pk.evaluate_schedule({"cl": 5}, {"a": [1, 2]}, n=10, progress=False)


# ---------------------------------------------------------------------------- Dask

def test_dask_spread_equals_local():
    # the same seed and block size give the same numbers on a LocalCluster bound to 127.0.0.1
    distributed = pytest.importorskip("distributed")
    m = model("oral-lag", variability={"cl": 0.3, "ka": 0.4}, proportional_error=0.15, lloq=0.05)
    kw = dict(schedules={"rich": [0, 0.5, 1, 2, 4, 6, 8, 12, 24], "sparse": [0, 1, 4, 12]}, n=1500, seed=21,
              block_size=500, progress=False)
    local = pk.evaluate_schedule(m, **kw)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp", host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        spread = pk.evaluate_schedule_dask(client, m, **kw)
    assert spread.table.equals(local.table) and spread.flags.equals(local.flags)
    assert spread.settings == local.settings
