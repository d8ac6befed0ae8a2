"""Experiment (not a bench target): "tail-extension" with an anchored reference line.

The rule before this experiment (commit 698a96f) tested candidate ``i`` against the suffix window that starts
right after it (row ``i + 1``).  Once a run of off-line points is in progress that window already holds the
run's points and tilts toward them.  The variant here tests each earlier point, while a run is in progress,
against the window as it was before the run started (the anchor row = the row after the run's latest point);
a point on the line resets the anchor to the row after it.  Everything else (firm levels, SHORT_TAIL, margin
and its exception, the 2 x TMAX floor) is the rule as it was.

Run ``python bench/_experiment_anchor.py`` (``--seed``, ``--ruv``, ``--n``; ``--variant
sides,run,above,below,margin[,anchor_min]``; ``--bench-variant`` takes a 7th field, ``narrow_up``; ``--grid``, ``--grid2`` for the grids below; ``--sweep``,
``--sweep2`` for the neighbourhoods on five settings; ``--bench-variant VARIANT [bench options]`` for the
full tables of ``bench/terminal_accuracy.py`` with the rule replaced).  Simulation, seeds and draws are
those of ``bench/terminal_accuracy.py``.  ``sides=None`` with levels (0.70, 0.90), run 4 replays the rule
of 698a96f exactly (checked on every design there).

Measurement notes (20,000 profiles per design; "met" = median error <= 1.10 x the oracle's and early < 20 %):

* The plain anchor (any anchor, both sides or only above, run 3..5, above level 0.6..0.8, with or without
  the one-point margin; 60 variants) is much worse: at best 2/8 designs met on the default seed, median
  error up to 1.2-1.8 x the oracle's.  The anchor of a short window (3-5 points) has a noisy slope, and
  that error is shared by every point tested against it, so noise makes runs: one-compartment profiles
  stop at 3 points far more often (3,502 of 20,000 rich IV profiles against 258).
* Anchoring only when the anchor window holds >= 6 points (``anchor_min``) fixes that.  With run 5 and
  the level above the line 0.75 on windows of >= 6 points, 0.70 on narrower ones (``narrow_up``), both
  sides anchored, all 8 designs meet the targets on the default seed (7/8 on seed 2, 8/8 on seed 3,
  5/8 at ruv 0.10 and 3/8 at ruv 0.25, as before the change: 6, 6, 6, 5, 3).  Fresh seeds 8-11 (looked
  at after the choice): 7, 7, 8, 8 of 8 against 6, 7, 5, 7 before.  This is the module's rule now.
* Without the margin that variant starts early in 57 % of fits on the rich two-compartment designs:
  the margin is still needed.
* Level 0.75 on every window (no narrow level) with the anchor also meets 8/8 on the default seed but
  makes the sparse two-compartment designs worse at ruv 0.25 (early 21.4 -> 27.0 %).  Level 0.75 without
  the anchor starts early in 22-23 % of the rich two-compartment IV fits.
* A separate, stricter level only for anchored tests (0.75-0.90) with 0.70 elsewhere met at most 8/8,
  7/8, 7/8 on the three seeds; not better.
"""

from __future__ import annotations

import argparse
import itertools
import sys
from pathlib import Path

import numpy as np
from scipy import stats

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "bench"))
from pkwidgets import terminal_rules as tr  # noqa: E402
from pkwidgets.lambda_z import _assemble, _window_stats  # noqa: E402
from terminal_accuracy import DESIGNS, RUV, candidates, oracle_fit, score, simulate  # noqa: E402

MODELS = ("1-cmt IV bolus", "1-cmt oral", "2-cmt IV bolus", "2-cmt oral")


def _prediction_residuals(w, seed):
    """Residual of each candidate against the window right after it (the module's function before the anchor)."""
    resid = np.full(w.n.shape, np.nan)
    if w.n.shape[0] < 2:
        return resid, np.zeros(w.n.shape, dtype=np.int64)
    n1, sx1, sy1, cxx1, b1, sse1 = w.n[1:], w.sx[1:], w.sy[1:], w.cxx[1:], w.slope[1:], w.sse[1:]
    candidate = w.candidate[:-1]
    tested = candidate & (n1 >= seed)
    with np.errstate(divide="ignore", invalid="ignore"):
        x0 = np.where(candidate, w.t[:-1], w.tref) - w.tref
        y0 = np.log(np.where(candidate, w.c[:-1], 1.0)) - w.yref
        xbar = sx1 / n1
        r = y0 - (sy1 / n1 + b1 * (x0 - xbar))
        scale = np.sqrt(sse1 / (n1 - 2.0) * (1.0 + 1.0 / n1 + (x0 - xbar) ** 2 / cxx1))
        r = r / np.maximum(scale, tr.RESIDUAL_FLOOR)
    resid[:-1] = np.where(tested, r, np.nan)
    return resid, None


def _resid_at(w, i, anchor, seed):
    """Studentised prediction residual of row ``i`` against the suffix window of row ``anchor`` (per profile)."""
    R, P = w.n.shape
    cols = np.arange(P)
    ok = anchor < R
    a = np.minimum(anchor, R - 1)
    n1, sx1, sy1 = w.n[a, cols], w.sx[a, cols], w.sy[a, cols]
    cxx1, b1, sse1 = w.cxx[a, cols], w.slope[a, cols], w.sse[a, cols]
    cand = w.candidate[i]
    tested = cand & ok & (n1 >= seed)
    with np.errstate(divide="ignore", invalid="ignore"):
        x0 = np.where(cand, w.t[i], w.tref) - w.tref
        y0 = np.log(np.where(cand, w.c[i], 1.0)) - w.yref
        xbar = sx1 / n1
        r = y0 - (sy1 / n1 + b1 * (x0 - xbar))
        scale = np.sqrt(sse1 / (n1 - 2.0) * (1.0 + 1.0 / n1 + (x0 - xbar) ** 2 / cxx1))
        r = r / np.maximum(scale, tr.RESIDUAL_FLOOR)
    return np.where(tested, r, np.nan), np.where(tested, n1 - 2, 0).astype(np.int64), tested


def anchored_cut(w, levels, run, seed, sides, anchor_min=0, anchored_up=None, narrow_up=None):
    """Like ``_bend_cut`` on residuals computed in the loop; ``sides``: None (today), "both", "above".

    ``anchor_min``: the anchor is used only when its window holds at least this many points (else row i + 1).
    ``anchored_up``: the one-sided t level above the line for points tested against an anchor (default
    ``levels[0]``, the level of every other test).  ``narrow_up``: the level above the line for tests against
    windows of fewer than ``anchor_min`` points (default ``levels[0]``).
    """
    R, P = w.n.shape
    dfs = np.arange(1, R + 1)
    q = (levels[0], levels[1], max(levels[1], tr.FIRM_BELOW_LEVEL), max(levels[0], tr.FIRM_ABOVE_LEVEL))
    tabs = [stats.t.ppf(v, dfs) for v in q]
    tab_anch = stats.t.ppf(levels[0] if anchored_up is None else anchored_up, dfs)
    tab_narrow = stats.t.ppf(levels[0] if narrow_up is None else narrow_up, dfs)
    n_up, n_lo, top_up, top_lo = np.zeros(P, np.int64), np.zeros(P, np.int64), np.full(P, -1), np.full(P, -1)
    firm, cut, done = np.zeros(P, dtype=bool), np.full(P, -1), np.zeros(P, dtype=bool)
    above_all = np.zeros((R, P), dtype=bool)
    firm_above_all = np.zeros((R, P), dtype=bool)
    for i in range(R - 1, -1, -1):
        anchor = np.full(P, i + 1)
        if sides in ("both", "above"):
            anchor = np.where(n_up > 0, top_up + 1, anchor)
        if sides == "both":
            anchor = np.where(n_lo > 0, top_lo + 1, anchor)
        if anchor_min:
            cols = np.arange(P)
            small = w.n[np.minimum(anchor, R - 1), cols] < anchor_min
            anchor = np.where(small, i + 1, anchor)
        r, df, tested = _resid_at(w, i, anchor, seed)
        k = np.maximum(df, 1) - 1
        t_up, t_lo, t_firm, t_firm_up = (np.take(tab, k) for tab in tabs)
        t_up = np.where(anchor > i + 1, np.take(tab_anch, k), t_up)  # anchored tests: their own level above
        t_up = np.where(df + 2 < anchor_min, np.take(tab_narrow, k), t_up)  # narrow windows: their own level
        above, below = tested & (r > t_up), tested & (r < -t_lo)
        firm_below, firm_above = tested & (r < -t_firm), tested & (r > t_firm_up)
        above_all[i], firm_above_all[i] = above, firm_above
        active = w.candidate[i] & ~done
        up, lo = above & active, below & active
        top_up, top_lo = np.where(up & (n_up == 0), i, top_up), np.where(lo & (n_lo == 0), i, top_lo)
        firm = np.where(lo, (firm & (n_lo > 0)) | firm_below, firm)
        n_up = np.where(up, n_up + 1, np.where(active, 0, n_up))
        n_lo = np.where(lo, n_lo + 1, np.where(active, 0, n_lo))
        hit_up, hit_lo = active & (n_up >= run), active & (n_lo >= run)
        cut, done = np.where(hit_up, top_up, np.where(hit_lo, top_lo, cut)), done | hit_up | hit_lo
    sure_up = (n_up > 1) | (w.candidate.sum(axis=0) > tr.SHORT_TAIL + 1) | tr._at(firm_above_all,
                                                                                     np.maximum(top_up, 0))
    end_up, end_lo = ~done & (n_up > 0) & sure_up, ~done & (n_lo > 0) & firm
    return np.where(end_up, top_up, np.where(end_lo, top_lo, cut)), above_all


def anchored_rule(w, *, levels, run, tmax, sides, margin=True, min_points=3, anchor_min=0, anchored_up=None,
                  narrow_up=None):
    seed = max(int(min_points), 3)
    resid, _ = _prediction_residuals(w, seed)  # unanchored: the edge point's own residual
    cut, above = anchored_cut(w, levels, run, seed, sides, anchor_min, anchored_up, narrow_up)
    start, has = tr._next_candidate(w, cut)
    nxt, _ = tr._next_candidate(w, start)
    with np.errstate(invalid="ignore"):
        kept = tr._at(above, np.maximum(cut, 0)) & (tr._at(resid, start) < tr.EDGE_KEEP_RESIDUAL)
    if margin:
        start = np.where((cut >= 0) & (tr._at(w.n, start) > seed) & ~kept, nxt, start)
    if tmax is not None:
        with np.errstate(invalid="ignore"):
            floor, has_floor = tr._first_row(w.candidate & (w.t >= 2.0 * np.asarray(tmax, dtype=float)))
        later = has_floor & (floor > start) & (tr._at(w.n, floor) >= seed)
        start = np.where(later, floor, start)
    return start, has & (tr._at(w.n, start) >= seed) & (tr._at(w.slope, start) < 0)


def scenarios(seed, n, ruv):
    """Simulated data of the 8 designs, in the order and with the draws of ``bench/terminal_accuracy.py``."""
    rng = np.random.default_rng(seed)
    out = []
    for model in MODELS:
        for design in DESIGNS:
            t, c, true_rate, in_phase = simulate(rng, model, design, n, ruv)
            oral = model.endswith("oral")
            cand, tmax = candidates(t, c, oral)
            oracle, oracle_first = oracle_fit(t, c, cand, in_phase)
            w = _window_stats(t, c, cand)
            out.append(dict(name=f"{model}, {design}", t=t, w=w, true=true_rate, first=oracle_first,
                            tmax=tmax if oral else None, oracle=score(oracle, true_rate, oracle_first)))
    return out


def evaluate(data, rule):
    """Target lines (ratio to the oracle's median, early share) of ``rule(w, tmax)`` on every design."""
    res = []
    for d in data:
        start, has = rule(d["w"], d["tmax"])
        fit = _assemble(d["w"], start, has, d["t"].shape)
        s = score(fit, d["true"], d["first"])
        res.append((d["name"], s["median"] / d["oracle"]["median"], s["early"]))
    return res


def summary(res):
    met = sum(r <= 1.10 and e < 0.20 for _, r, e in res)
    return met, max(r for _, r, _ in res), max(e for _, _, e in res)


def lines(res):
    return "\n".join(f"- {name}: median error {r:.3f} x the oracle's, early {100 * e:.1f} %: "
                     f"{'met' if r <= 1.10 and e < 0.20 else 'NOT met'}" for name, r, e in res)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=20_000)
    ap.add_argument("--seed", type=int, default=20260612)
    ap.add_argument("--ruv", type=float, default=RUV)
    ap.add_argument("--grid", action="store_true", help="run the small grid of variants")
    ap.add_argument("--variant", default=None, help="sides,run,above,below,margin[,anchor_min] e.g. both,4,0.7,0.9,1")
    ap.add_argument("--grid2", action="store_true", help="the wider diagnostic grid (higher levels, anchor_min)")
    args = ap.parse_args(argv)
    data = scenarios(args.seed, args.n, args.ruv)

    # sides=None, levels (0.70, 0.90), run 4 replays the rule as it was before the anchor (commit 698a96f; checked
    # identical on every design there); the module's current rule is sides="both", levels (0.75, 0.90), run 5,
    # anchor_min 6, narrow_up 0.70
    base = evaluate(data, lambda w, tmax: anchored_rule(w, levels=(0.70, 0.90), run=4, tmax=tmax, sides=None))
    print(f"seed {args.seed}, ruv {args.ruv}: the rule before the anchor\n{lines(base)}\n")
    now = evaluate(data, lambda w, tmax: tr._tail_extension(w, min_points=3, off_line_levels=tr.OFF_LINE_LEVELS,
                                                            run=tr.EXTENSION_RUN, tmax=tmax))
    print(f"the module's rule now\n{lines(now)}\n")
    variants = []
    if args.variant:
        s, r, a, b, m, *k = args.variant.split(",")
        variants.append((None if s == "none" else s, int(r), float(a), float(b), bool(int(m)), int(k[0]) if k else 0))
    if args.grid:
        variants += list(itertools.product(("both", "above"), (3, 4, 5), (0.6, 0.65, 0.7, 0.75, 0.8), (0.9,),
                                           (True, False), (0,)))
    if args.grid2:
        variants += list(itertools.product(("both", "above"), (3, 4, 5), (0.7, 0.8, 0.9, 0.95), (0.9, 0.95),
                                           (True,), (0, 5, 6, 8)))
    for sides, run, up, lo, margin, amin in variants:
        res = evaluate(data, lambda w, tmax: anchored_rule(w, levels=(up, lo), run=run, tmax=tmax, sides=sides,
                                                            margin=margin, anchor_min=amin))
        met, worst_ratio, worst_early = summary(res)
        print(f"sides={sides} run={run} above={up} below={lo} margin={margin} anchor_min={amin}: met {met}/8, "
              f"worst ratio {worst_ratio:.3f}, worst early {100 * worst_early:.1f} %")
        if args.variant:
            print(lines(res))


if __name__ == "__main__" and not {"--sweep", "--sweep2"} & set(sys.argv) and "--bench-variant" not in sys.argv:
    main()


SETTINGS = ((20260612, RUV), (2, RUV), (3, RUV), (20260612, 0.10), (20260612, 0.25))


def sweep2(n=20_000):
    """Today's levels for unanchored tests, a separate level above the line for anchored ones."""
    data = {s: scenarios(s[0], n, s[1]) for s in SETTINGS}
    grid = itertools.product(("both", "above"), (4, 5), (0.75, 0.8, 0.85, 0.9), (0, 5, 6, 7))
    for sides, run, aup, amin in grid:
        out = []
        for s in SETTINGS:
            res = evaluate(data[s], lambda w, tmax: anchored_rule(w, levels=(0.7, 0.9), run=run, tmax=tmax,
                                                                  sides=sides, anchor_min=amin, anchored_up=aup))
            met, worst_ratio, worst_early = summary(res)
            out.append(f"{met}/8 ({worst_ratio:.3f}, {100 * worst_early:.1f} %)")
        print(f"sides={sides} run={run} levels=(0.7, 0.9) anchored_up={aup} anchor_min={amin}: " + " | ".join(out),
              flush=True)


def sweep(n=20_000):
    """Met counts on the five settings (default seed, seeds 2 and 3, ruv 0.10 and 0.25) of a neighbourhood."""
    data = {s: scenarios(s[0], n, s[1]) for s in SETTINGS}
    grid = [(None, 4, 0.7, 0.9, 0), (None, 5, 0.7, 0.9, 0)]
    grid += list(itertools.product(("both", "above"), (4, 5, 6), (0.65, 0.7, 0.75), (0.9,), (5, 6, 7)))
    for sides, run, up, lo, amin in grid:
        out = []
        for s in SETTINGS:
            res = evaluate(data[s], lambda w, tmax: anchored_rule(w, levels=(up, lo), run=run, tmax=tmax,
                                                                  sides=sides, anchor_min=amin))
            met, worst_ratio, worst_early = summary(res)
            out.append(f"{met}/8 ({worst_ratio:.3f}, {100 * worst_early:.1f} %)")
        print(f"sides={sides} run={run} above={up} below={lo} anchor_min={amin}: " + " | ".join(out), flush=True)


if __name__ == "__main__" and "--sweep" in sys.argv:
    sweep()
if __name__ == "__main__" and "--sweep2" in sys.argv:
    sweep2()


def bench_with(variant, argv):
    """``bench/terminal_accuracy.py`` with the "tail-extension" rule replaced by ``variant`` (full tables)."""
    import terminal_accuracy

    s, r, a, b, m, k, *nu = variant.split(",")  # optional 7th field: narrow_up

    def rule(w, *, min_points, off_line_levels, run, tmax):
        return anchored_rule(w, levels=(float(a), float(b)), run=int(r), tmax=tmax, sides=None if s == "none" else s,
                             margin=bool(int(m)), min_points=min_points, anchor_min=int(k),
                             narrow_up=float(nu[0]) if nu else None)

    tr._RULES["tail-extension"] = rule
    print(f"(tail-extension replaced by the anchored variant sides={s} run={r} above={a} below={b} margin={m} "
          f"narrow_up={nu[0] if nu else a} "
          f"anchor_min={k})")
    terminal_accuracy.main(argv)


if __name__ == "__main__" and len(sys.argv) > 2 and sys.argv[1] == "--bench-variant":
    bench_with(sys.argv[2], sys.argv[3:])
