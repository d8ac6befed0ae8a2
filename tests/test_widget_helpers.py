"""Pure helpers of the picker and the navigator (issue 13, item 5), without a browser: set traits, assert.

Sources for the checks:
- lambda z and its 95 % bounds: ``scipy.stats.linregress`` on ln(conc) (ordinary least squares; reference
  library), slope ± t(0.975, n-2) x stderr with ``scipy.stats.t`` (t interval of a least-squares slope,
  Draper & Smith, Applied Regression Analysis, from memory);
- t½ = ln 2 / λz and AUCIFO = AUCLST + CLST / λz (Gibaldi & Perrier, Pharmacokinetics, 2nd ed.); their
  bounds are the same maps applied to the λz bounds (a monotone map keeps the interval's level, from memory);
- least-squares residuals sum to zero when the line has an intercept (Draper & Smith, from memory);
- units: AUC is time x concentration and λz is 1/time (definitions); the text must equal the core's
  ``NCAResult.units`` (pint, via ``pkwidgets.units``);
- 1-2-5 ticks per decade on a log axis, natural ("human") sort of IDs: common practice, no source;
- the one-compartment IV bolus profile below is synthetic (invented here), as is the study with text IDs.
"""

import math

import numpy as np
import pandas as pd
import pytest
import scipy.stats

from pkwidgets import nca, nca_arrays
from pkwidgets.widgets import StudyNavigator, TerminalPhasePicker
from pkwidgets.widgets import _axes as A
from pkwidgets.widgets import _fit_view as F
from pkwidgets.widgets import _view as V
from pkwidgets.widgets.navigator import natural_key, natural_order
from pkwidgets.widgets.overview import overview_layout

T = np.array([0.5, 1, 2, 4, 6, 8, 12, 24])
RNG = np.random.default_rng(13)
C_NOISY = 100 * np.exp(-0.1 * T) * np.exp(RNG.normal(0, 0.05, T.size))   # synthetic, seeded


def _click(mark, index):
    mark._handle_custom_msgs(None, {"event": "element_click", "data": {"index": index}}, [])


def test_bounds_match_scipy_t_interval():
    res = nca_arrays(T, C_NOISY, terminal=(2.0, 24.0), auc_method="lin-up/log-down")
    b = F.fit_bounds(T, C_NOISY, res)
    sel = T >= 2
    ref = scipy.stats.linregress(T[sel], np.log(C_NOISY[sel]))
    q = scipy.stats.t.ppf(0.975, sel.sum() - 2)
    lo, hi = -ref.slope - q * ref.stderr, -ref.slope + q * ref.stderr
    assert b["LAMZ_LOWER95"] == pytest.approx(lo, rel=1e-10)
    assert b["LAMZ_UPPER95"] == pytest.approx(hi, rel=1e-10)
    assert b["LAMZHL_LOWER95"] == pytest.approx(math.log(2) / hi, rel=1e-10)
    assert b["LAMZHL_UPPER95"] == pytest.approx(math.log(2) / lo, rel=1e-10)
    auclst, clst = float(res["AUCLST"][0]), float(C_NOISY[-1])
    assert b["AUCIFO_LOWER95"] == pytest.approx(auclst + clst / hi, rel=1e-10)
    assert b["AUCIFO_UPPER95"] == pytest.approx(auclst + clst / lo, rel=1e-10)


def test_bounds_come_from_the_engine_when_it_has_them():
    res = nca_arrays(T, C_NOISY, terminal=(2.0, 24.0))
    given = {code: np.array([float(i + 1)]) for i, code in enumerate(F.BOUND_CODES)}
    res.update(given)                      # what the engine returns once it computes the bounds itself
    assert F.fit_bounds(T, C_NOISY, res) == {code: float(v[0]) for code, v in given.items()}


def test_bounds_need_three_points():
    # two points: no residual degrees of freedom, so no t interval (Draper & Smith, from memory)
    res = nca_arrays(T, C_NOISY, terminal=(12.0, 24.0))
    assert all(math.isnan(v) for v in F.fit_bounds(T, C_NOISY, res).values())
    assert F.bounds_text(F.fit_bounds(T, C_NOISY, res), "LAMZ") == "—"


def test_residuals_are_the_least_squares_residuals():
    res = nca_arrays(T, C_NOISY, terminal=(2.0, 24.0))
    t, r = F.fit_residuals(T, C_NOISY, res)
    sel = T >= 2
    ref = scipy.stats.linregress(T[sel], np.log(C_NOISY[sel]))
    np.testing.assert_allclose(t, T[sel])
    np.testing.assert_allclose(r, np.log(C_NOISY[sel]) - (ref.intercept + ref.slope * T[sel]), atol=1e-10)
    assert abs(r.sum()) < 1e-10


def test_readout_shows_bounds_and_units():
    p = TerminalPhasePicker(T, C_NOISY, window=(2.0, 24.0), units={"time": "h", "conc": "ng/mL"})
    labels = [k for k, _ in p.view.readout]
    assert labels[:4] == ["λz (1/h)", "  95 % bounds", "t½ (h)", "  95 % bounds"]
    assert "AUCIFO (h·ng/mL)" in labels
    b = F.fit_bounds(T, C_NOISY, p.result)
    assert f"{b['LAMZ_LOWER95']:.4g} to {b['LAMZ_UPPER95']:.4g}" in p.readout.value
    assert p._xaxis.label == "time after dose (h)" and p._yaxis.label == "concentration (ng/mL), log scale"
    assert p._residuals._xaxis.label == "time (h)"
    np.testing.assert_allclose(p._residuals._dots.y, F.fit_residuals(T, C_NOISY, p.result)[1])


def test_unit_text_equals_the_core_and_says_so_without_units():
    units = {"time": "h", "conc": "mg/L", "dose": "mg"}
    data = pd.DataFrame({"id": 1, "t": T, "c": C_NOISY, "dose": 100.0})
    res = nca(data, by="id", time="t", conc="c", dose="dose", units=units)
    u = A.unit_labels(res.settings["units"])
    assert {k: u[k] for k in ("LAMZ", "LAMZHL", "AUCIFO")} == {k: res.units[k] for k in ("LAMZ", "LAMZHL", "AUCIFO")}
    assert u["AUCIFO"] == "h·mg/L" and u["LAMZ"] == "1/h"
    assert A.unit_labels(None)["LAMZHL"] == "time unit"
    plain = TerminalPhasePicker(T, C_NOISY)
    assert plain.view.readout[0][0] == "λz (1/time unit)" and plain._xaxis.label == "time after dose (time unit)"


@pytest.mark.parametrize("values, max_ticks", [([0.3, 7.0], 7), ([0.011, 480.0], 7), ([1e-3, 1e4], 5),
                                               ([2.0, 3.0], 7), ([5.0, 5.0], 7)])
def test_log_ticks_are_few_and_round(values, max_ticks):
    lo, hi, ticks = A.log_ticks(values, max_ticks)
    assert 2 <= len(ticks) <= max_ticks and lo < hi
    assert lo <= min(values) and hi >= max(values)
    mantissas = {round(x / 10 ** math.floor(math.log10(x) + 1e-12), 9) for x in ticks}
    assert mantissas <= {1.0, 2.0, 5.0, 3.0}


def test_time_axis_covers_the_samples_and_the_tail_stops_at_its_edge():
    # the case: 24 h of data must not give a 67 h axis
    p = TerminalPhasePicker(T, C_NOISY)
    lo, hi = p.view.x_range
    assert lo < 0.5 and 24 < hi <= 24 + 0.05 * 23.5
    assert (p._xs.min, p._xs.max) == (lo, hi)
    assert p.view.tail_x[0] == float(p.result["TLST"][0]) and p.view.tail_x[-1] == hi
    ticks = p._yaxis.tick_values
    assert len(ticks) <= 7 and p._ys[True].min <= C_NOISY.min() and p._ys[True].max >= C_NOISY.max()


def test_legend_is_outside_the_figure():
    p = TerminalPhasePicker(T, C_NOISY)
    assert not any(m.display_legend for m in p.figure.marks)
    for st in V.ROLE_STYLE.values():
        assert st["label"] in p.legend.value


def test_click_in_a_hand_window_keeps_it():
    p = TerminalPhasePicker(T, C_NOISY, window=(2.0, 24.0))
    fit = list(p.view.points["fit"]["x"])
    _click(p._marks["fit"], fit.index(8.0))
    assert p.window == (2.0, 24.0) and p.excluded == [8.0]
    assert "kept" in p.status and "8 left out" in p.status
    sel = (T >= 2) & (T != 8)
    ref = scipy.stats.linregress(T[sel], np.log(C_NOISY[sel]))
    assert float(p.result["LAMZ"][0]) == pytest.approx(-ref.slope, rel=1e-10)


def test_click_in_automatic_mode_says_which_points_the_search_chose():
    p = TerminalPhasePicker(T, C_NOISY, units={"time": "h", "conc": "ng/mL"})
    before = F.fit_times(T, p.result)
    _click(p._marks["fit"], 0)                     # leave out the earliest fit point
    first = before[0]
    ref = nca_arrays(T, C_NOISY, exclude=np.isclose(T, first))   # the search run independently
    chosen = [float(x) for x in T[ref.lambda_z_used[0]]]
    assert p.window is None and "re-run" in p.status
    assert F.times_text(chosen, "h") in p.status and f"{len(chosen)} points" in p.status
    assert "re-run" in p.readout.value


def test_rerun_message_names_points_dropped_besides_the_click():
    # the case: a 7-point fit, one click, the search keeps 3: the 3 others dropped are named
    msg = F.rerun_message(4.0, [4.0, 6, 8, 12, 16, 20, 24], [16.0, 20, 24], "h")
    assert "it chose 3 points (16, 20, 24 h)" in msg and "also dropped 6, 8, 12 h" in msg
    assert "drag a window" in msg
    assert "dropped" not in F.rerun_message(4.0, [4.0, 6, 8], [6.0, 8.0], "h")


def test_new_profile_clears_band_and_selection():
    p = TerminalPhasePicker(T, C_NOISY)
    p._brush.brushing = True
    p._brush.selected = np.array([3.0, 13.0])
    p._brush.brushing = False
    assert p.window == (4.0, 12.0)
    np.testing.assert_array_equal(p._brush.selected, [4.0, 12.0])     # the band snaps to the window
    p._marks["fit"].selected = [0]
    p.load(T, 2 * C_NOISY)
    assert p._brush.selected is None and p.window is None
    assert all(m.selected is None for m in p._marks.values())
    assert "automatic search" in p.readout.value and "window" not in V.choice_summary(p.window, p.excluded)
    p.window = (4.0, 24.0)
    p._auto.click()
    assert p._brush.selected is None


@pytest.mark.parametrize("keys, expected", [
    ([("S10",), ("S2",), ("S1",)], [("S1",), ("S2",), ("S10",)]),
    ([(10,), (2,), (1,)], [(1,), (2,), (10,)]),
    ([("B-2", "P10"), ("b-2", "P9"), ("A-10", "P1")], [("A-10", "P1"), ("b-2", "P9"), ("B-2", "P10")]),
])
def test_natural_order(keys, expected):
    assert [keys[i] for i in natural_order(keys)] == expected
    assert natural_key(2) < natural_key("1")        # numbers first


def _text_id_study():
    t = np.array([0, 1, 2, 4, 8, 12.0])
    rows = [dict(sid=s, time=ti, conc=round(k * 10 * (np.exp(-0.2 * ti) - np.exp(-2 * ti)), 4))
            for k, s in enumerate(["S10", "S2", "S1"], start=1) for ti in t]
    return pd.DataFrame(rows)


def test_navigator_sorts_text_ids_naturally_and_thumbnails_click():
    study = _text_id_study()
    nav = StudyNavigator(study, by="sid", time="time", conc="conc")
    assert [k[0] for k in nav.profile_keys] == ["S1", "S2", "S10"]
    assert [label for label, _ in nav._jump.options] == ["sid S1", "sid S2", "sid S10"]
    _click(nav.overview._hit, 2)                    # click the third thumbnail
    assert nav.index == 2 and nav.picker.figure.title == "sid S10"
    shown = nca(study, by="sid", time="time", conc="conc").profile("S10").parameters["LAMZ"]
    assert float(nav.picker.result["LAMZ"][0]) == pytest.approx(shown, rel=1e-12)
    assert nav.overview._hit.selected is None


def test_overview_layout_cells():
    times = [np.array([0, 1, 2, 4.0])] * 10
    concs = [np.array([0, 4, 2, 1.0])] * 10
    used = [np.array([False, False, True, True])] * 10
    g = overview_layout([f"P{i}" for i in range(10)], times, concs, used, [i == 3 for i in range(10)], 9,
                        columns=4)
    assert g["rows"] == 3 and g["label_text"][3] == "P3 !"
    np.testing.assert_array_equal(g["hit_x"], np.arange(10) % 4 + 0.5)
    np.testing.assert_array_equal(g["hit_y"], -(np.arange(10) // 4) - 0.5)
    assert g["fit_x"].size == 20 and g["other_x"].size == 10     # zero concentration not drawn on log
    assert g["frames"]["current"][0].shape == (1, 5) and g["frames"]["review"][0].shape == (1, 5)
    assert g["frames"]["plain"][0].shape == (8, 5)
    # each sparkline stays inside its cell
    for i in range(10):
        x = g["lines_x"][i][np.isfinite(g["lines_x"][i])]
        assert np.all((x > i % 4) & (x < i % 4 + 1))


def test_navigator_passes_study_units():
    units = {"time": "h", "conc": "ng/mL", "dose": "mg"}
    nav = StudyNavigator(_text_id_study().assign(dose=50.0), by="sid", time="time", conc="conc", dose="dose",
                         units=units)
    assert nav.picker.units == units
    assert "t½ (h)" in nav.picker.readout.value and nav.picker._xaxis.label == "time after dose (h)"
