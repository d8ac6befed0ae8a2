"""The engine in stages: declared outputs, catalogue formulas, options, stage functions, non-finite results.

Sources, beside each check:

- one-compartment IV bolus, :math:`C = C_0 e^{-kt}`: AUC = C0/k, CL = Dose/AUC,
  V = Dose/C0, MRT = 1/k (Gibaldi & Perrier, Pharmacokinetics, 2nd ed., 1982,
  from memory); the log trapezoid is exact on an exponential segment (same
  source, Appendix D);
- log-linear back-extrapolation of C0 from two declining samples (same source,
  from memory);
- IEEE 754 double precision: the largest finite number is about 1.8e308, so
  1e308 + 1e308 overflows to +inf (numpy.finfo);
- SWING = (CMAX - CMIN) / CMIN (CDISC PPTESTCD SWING definition, recalled);
  with CMIN = 0 the division is by zero;
- BLQ positions (before the first / between / after the last measurable
  concentration): common practice, no source.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from pkwidgets import nca_arrays, nca_profile
from pkwidgets._anchor import anchor_at_dose_time
from pkwidgets._classify import ChunkSamples, classify_samples
from pkwidgets.blq import BLQRules
from pkwidgets.options import ROUTES, NCAOptions
from pkwidgets.parameters import DERIVE_INPUTS, PARAMETERS, Parameter, derivation_order, output_codes
from pkwidgets.qc import FLAGS, SampleStatus

T = np.array([0.25, 0.5, 1, 2, 4, 6, 8, 12, 24.0])
K, C0, DOSE = 0.1, 50.0, 500.0


def _profiles():
    """Two one-compartment profiles (IV bolus shape, C0 = 50, k = 0.1 / h) and one oral-like profile."""
    t = np.tile(T, (3, 1))
    c = C0 * np.exp(-K * t)
    c[2] = 40.0 * (np.exp(-0.1 * T) - np.exp(-1.5 * T))
    return t, c


OPTION_SETS = list(itertools.product(ROUTES, (None, 12.0), ((), [(0, 4)], {"AUCINT_late": (4, 24)}), (None, DOSE)))


@pytest.mark.parametrize("route,tau,partial,dose", OPTION_SETS)
def test_output_codes_are_the_keys_nca_arrays_returns(route, tau, partial, dose):
    # contract for Dask's meta: the codes and their order come from the catalogue and the options alone
    t, c = _profiles()
    opts = NCAOptions(route=route, tau=tau, partial=partial, duration=1.0 if route == "iv-infusion" else None)
    res = nca_arrays(t, c, options=opts, dose=dose)
    assert list(res) == output_codes(opts, has_dose=dose is not None)


def test_output_codes_with_per_profile_tau():
    t, c = _profiles()
    res = nca_arrays(t, c, tau=np.array([12.0, np.nan, np.nan]))
    assert list(res) == output_codes(NCAOptions(), has_tau=True)
    assert "AUCTAU" in res and "AUCTAU" not in output_codes(NCAOptions())


@pytest.mark.parametrize("route,tau", list(itertools.product(ROUTES, (None, 12.0))))
def test_every_formula_reads_only_what_the_same_run_returns(route, tau):
    codes = set(output_codes(NCAOptions(route=route, tau=tau, duration=1.0)))
    for code in codes:
        for name in PARAMETERS[code].inputs:
            assert name in codes or name in DERIVE_INPUTS, f"{code} needs {name}"


def test_derivation_order_puts_inputs_first():
    order = derivation_order()
    seen = set()
    for code in order:
        assert all(n not in order or n in seen for n in PARAMETERS[code].inputs), code
        seen.add(code)
    assert {c for c, p in PARAMETERS.items() if p.derive is not None} == set(order)


def test_catalogue_formulas_give_closed_form_iv_bolus_values():
    # one-compartment IV bolus (Gibaldi & Perrier, from memory): AUC = C0/k, CL = Dose/AUC, V = Dose/C0,
    # MRT = 1/k, VSS = V; log trapezoid exact on exponential segments
    t, c = _profiles()
    r = nca_arrays(t[:1], c[:1], dose=DOSE, route="iv-bolus", auc_method="lin-up/log-down")
    auc = C0 / K
    np.testing.assert_allclose(r["AUCIFO"][0], auc, rtol=1e-12)
    np.testing.assert_allclose(r["CLO"][0], DOSE / auc, rtol=1e-12)
    np.testing.assert_allclose(r["VZO"][0], DOSE / C0, rtol=1e-12)
    np.testing.assert_allclose(r["MRTIVIFO"][0], 1 / K, rtol=1e-12)
    np.testing.assert_allclose(r["VSSO"][0], DOSE / C0, rtol=1e-12)
    np.testing.assert_allclose(r["AUCIFOD"][0], auc / DOSE, rtol=1e-12)


def test_a_parameter_added_to_the_catalogue_alone_is_computed(monkeypatch):
    # AUMCIFP (AUMC to infinity from the predicted last concentration; CDISC code recalled) is not in the
    # catalogue: declaring it there is all it takes.  For C = C0 e^{-kt} the AUMC to infinity is C0/k^2
    # (Gibaldi & Perrier, from memory), and the predicted CLST equals the observed one.
    entry = Parameter("AUMCIFP", "AUMC Infinity Pred", "aumc", "AUMCLST + CLSTP*TLST/LAMZ + CLSTP/LAMZ**2.",
                      True, derive=lambda AUMCLST, CLSTP, TLST, LAMZ: AUMCLST + CLSTP * TLST / LAMZ
                      + CLSTP / LAMZ**2)
    monkeypatch.setitem(PARAMETERS, "AUMCIFP", entry)
    t, c = _profiles()
    r = nca_arrays(t[:1], c[:1], route="iv-bolus", auc_method="lin-up/log-down")
    assert "AUMCIFP" in r
    np.testing.assert_allclose(r["AUMCIFP"][0], C0 / K**2, rtol=1e-10)


def test_options_object_and_keywords_give_the_same_result():
    t, c = _profiles()
    opts = NCAOptions(route="iv-infusion", duration=0.5, tau=24.0, auc_method="lin-log", partial=[(0, 2)])
    a = nca_arrays(t, c, options=opts, dose=DOSE)
    b = nca_arrays(t, c, route="iv-infusion", duration=0.5, tau=24.0, auc_method="lin-log", partial=[(0, 2)],
                   dose=DOSE)
    assert list(a) == list(b)
    for k in a:
        assert np.array_equal(a[k], b[k], equal_nan=True), k
    assert a.options == opts and a.settings["route"] == "iv-infusion"
    # a keyword that differs from its default replaces the option
    assert nca_arrays(t, c, options=opts, route="iv-bolus").settings["route"] == "iv-bolus"
    p = nca_profile(T, c[0], options=NCAOptions(route="iv-bolus", auc_method="lin-up/log-down"), dose=DOSE)
    np.testing.assert_allclose(p["CLO"], K * DOSE / C0, rtol=1e-12)   # CL = k V = k Dose / C0


@pytest.mark.parametrize("kwargs,match", [
    ({"route": "iv bolus"}, r"The 'route' option must be one of .*got 'iv bolus'\. Did you mean 'iv-bolus'\?"),
    ({"auc_method": "log"}, r"The 'auc_method' option must be one of .*got 'log'"),
    ({"tau": 0}, r"The 'tau' option must be a finite number > 0"),
    ({"tau": np.array([12.0, -1.0, 12.0])}, r"tau must be positive and finite; profile 1 has -1\.0"),
])
def test_bad_options_get_one_message_form(kwargs, match):
    t, c = _profiles()
    with pytest.raises(ValueError, match=match):
        nca_arrays(t, c, **kwargs)


def test_overflowing_concentrations_give_nan_and_a_flag():
    # IEEE 754 (numpy.finfo(float).max ~ 1.8e308): the trapezoid 0.5 * dt * (1e308 + 1e308) overflows to +inf
    t = np.array([[0, 1, 2, 4.0], [0, 1, 2, 4.0]])
    c = np.array([[0, 1e308, 1e308, 1e307], [0, 10, 8, 4.0]])
    r = nca_arrays(t, c)
    assert np.isnan(r["AUCLST"][0]) and np.isfinite(r["AUCLST"][1])
    assert r["CMAX"][0] == 1e308                       # finite values of the same profile stay
    assert r.flags["nonfinite_result"].tolist() == [True, False]
    assert not any(np.isinf(v).any() for v in r.values())
    assert FLAGS["nonfinite_result"][0] == "review"


def test_swing_with_cmin_zero_is_nan_and_flagged():
    # SWING = (CMAX - CMIN) / CMIN (CDISC definition, recalled): CMIN = 0 divides by zero
    t = np.array([0, 1, 2, 4, 8, 12.0])
    r = nca_arrays(t, np.array([0, 10, 8, 4, 2, 1.0]), tau=12.0)
    assert r["CMIN"][0] == 0.0
    assert np.isnan(r["SWING"][0]) and r.flags["nonfinite_result"][0]
    r2 = nca_arrays(t, np.array([0.5, 10, 8, 4, 2, 1.0]), tau=12.0)
    np.testing.assert_allclose(r2["SWING"][0], (10 - 0.5) / 0.5, rtol=1e-15)
    assert not r2.flags["nonfinite_result"][0]


def _samples(t, c, blq):
    t, c, blq = (np.asarray(a, dtype=d)[:, None] for a, d in ((t, float), (c, float), (blq, bool)))
    return ChunkSamples(t, c, blq, np.full(t.shape, 0.1), np.zeros(t.shape, dtype=bool))


def test_classify_reads_blq_by_position():
    # BLQ before the first, between, and after the last measurable concentration (common practice, no source)
    s = _samples([-1, 0, 1, 2, 3, 4, 5], [np.nan, np.nan, 5, np.nan, 3, np.nan, np.nan],
                 [False, True, False, True, False, True, False])
    out = classify_samples(s, BLQRules(before="zero", between="missing", after="half-lloq"))
    S = SampleStatus
    assert out.status[:, 0].tolist() == [S.BEFORE_DOSE, S.USED, S.USED, S.BLQ_MISSING_BETWEEN, S.USED, S.USED,
                                         S.MISSING_CONC]
    np.testing.assert_array_equal(out.value[:, 0], [np.nan, 0.0, 5, np.nan, 3, 0.05, np.nan])
    assert out.usable[:, 0].tolist() == [False, True, True, False, True, True, False]


def test_anchor_back_extrapolates_c0_for_a_bolus():
    # log-linear back-extrapolation through (1, 8) and (2, 4): C0 = 8 * 2 = 16 (Gibaldi & Perrier, from memory)
    s = _samples([0, 1, 2, 4], [3.0, 8, 4, 1], [False] * 4)
    classified = classify_samples(s, BLQRules())
    anchor = anchor_at_dose_time(s, classified, np.array([np.nan]), "iv-bolus", BLQRules())
    np.testing.assert_allclose(anchor.conc, [16.0], rtol=1e-15)
    assert anchor.flags["c0_extrapolated"].tolist() == [True]
    assert classified.status[0, 0] == SampleStatus.BOLUS_PREDOSE and not anchor.usable[0, 0]
