"""Sampling-design speed: simulation, NCA engine and summary per 10^6 subjects, side by side in one run.

Run with ``python bench/design_speed.py`` (options: ``--n``, ``--repeat``,
``--profile-n``).  Virtual subjects (synthetic, seeded) come from a
one-compartment oral model like ``bench/nca_speed.py``'s (CL 5, V 50, ka 1.2;
log-normal variability 0.3, 0.25, 0.4; 12 % proportional error; LLOQ 0.05),
sampled at 16 times to 72 h.

It prints, in one run on the same machine state:

1. end to end: :func:`pkwidgets.evaluate_schedule` on ``--n`` subjects
   (best of ``--repeat``; wall and CPU time);
2. its stages timed one by one on the same subjects: simulation (subjects,
   curves, residual error, censoring), the engine (:func:`pkwidgets.nca_arrays`,
   one call over all profiles), the exact values and the summary;
3. a profile of the engine from outside (``cProfile``, engine run on one
   thread so that the profiler sees every chunk), grouped by stage;
4. an experiment, only here in ``bench/`` and only if ``numba`` can be
   imported (it is not a dependency of pkwidgets; kernels in
   ``bench/_numba_kernels.py``): compiled kernels of the lambda-z search (the
   adjusted-R² rule; the default tail-extension rule has no compiled kernel)
   and of the segment areas, compared with the engine's NumPy stages on the same
   inputs (NumPy in the engine's chunks and threads), for equality and speed;
   and a one-pass compiled kernel of this benchmark's case (CMAX, TMAX, TLST,
   AUCLST, LAMZ, AUCIFO only) against the whole engine: a ceiling for what a
   compiled engine could reach.

With ``--base COMMIT`` it prints instead base / worktree ratios measured
side by side in one run (``bench/_side_by_side.py``): the engine (1 and
all threads) and :func:`pkwidgets.evaluate_schedule` interleaved in one
process (the code alone: both versions share the process's heap settings),
then ``evaluate_schedule`` in fresh processes turn about (as shipped; with
and without the heap settings of :mod:`pkwidgets._memory`).

Targets (issue 17): end to end <= 3 s and engine alone <= 1 s per 10^6
subjects x 16 samples on 2 cores.  Timings depend on the machine and on what
else runs on it: the header prints the CPU, core count and load average.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "bench"))

from _numba_kernels import numba_kernels, whole_profile_kernel  # noqa: E402
from nca_speed import machine  # noqa: E402

from pkwidgets import CompartmentModel, engine, evaluate_schedule, nca_arrays  # noqa: E402
from pkwidgets import design as design_mod  # noqa: E402
from pkwidgets._exposure import running_sum  # noqa: E402
from pkwidgets.auc import segment_areas, segment_is_log  # noqa: E402
from pkwidgets.design_curves import exact_values  # noqa: E402
from pkwidgets.design_models import draw_subjects  # noqa: E402
from pkwidgets.design_summary import summarise  # noqa: E402
from pkwidgets.lambda_z import fit_lambda_z_samples_major  # noqa: E402

NOMINAL = np.array([0, 0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48, 72.0])
MODEL = CompartmentModel(route="extravascular", dose=100.0, cl=5.0, v=50.0, ka=1.2,
                         variability={"cl": 0.3, "v": 0.25, "ka": 0.4}, proportional_error=0.12, lloq=0.05)
TARGET_END_TO_END = 3.0   # s per 10^6 subjects x 16 samples
TARGET_ENGINE = 1.0       # s per 10^6 profiles


def best_of(repeat, f):
    """(best wall s, CPU s of that run, result of the last run)."""
    runs, out = [], None
    for _ in range(repeat):
        c0, w0 = time.process_time(), time.perf_counter()
        out = f()
        runs.append((time.perf_counter() - w0, time.process_time() - c0))
    runs.sort()
    return runs[0][0], runs[0][1], out


def simulate_blocks(n, block=65_536, seed=1):
    """Subjects, observations and censoring for n subjects, block by block (as evaluate_schedule does)."""
    parts = []
    for b, s in enumerate(range(0, n, block)):
        size = min(block, n - s)
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(b, 0)))
        subjects = draw_subjects(MODEL, size, rng)
        obs, blq, _ = design_mod._observe(MODEL, subjects, NOMINAL, rng, keep_true=False)
        parts.append((subjects, obs, blq))
    subjects = {k: np.concatenate([p[0][k] for p in parts]) for k in parts[0][0]}
    return subjects, np.concatenate([p[1] for p in parts]), np.concatenate([p[2] for p in parts])


def stages(n, repeat):
    rows = []
    w, c, (subjects, obs, blq) = best_of(repeat, lambda: simulate_blocks(n))
    rows.append(("simulation (subjects, curves, error, censoring)", w, c))
    t = np.broadcast_to(NOMINAL, obs.shape)
    opts = dict(route="extravascular", dose=MODEL.dose, lloq=MODEL.lloq, auc_method="linear")
    w, c, res = best_of(repeat, lambda: nca_arrays(t, obs, blq=blq, **opts))
    rows.append(("engine: nca_arrays, one call", w, c))
    w, c, exact = best_of(repeat, lambda: exact_values(MODEL, subjects, res["TLST"]))
    rows.append(("exact values (closed forms)", w, c))

    def summary():
        errors = {code: (res[code] - exact[code]) / exact[code] for code in design_mod.DESIGN_CODES}
        counts = {"AUCPEO > 20 %": int(np.count_nonzero(res["AUCPEO"] > 20))}
        counts.update({k: int(np.count_nonzero(v)) for k, v in res.flags.items()})
        return summarise({"16": NOMINAL}, {"16": errors}, {"16": counts}, n)
    w, c, _ = best_of(repeat, summary)
    rows.append(("summary (relative errors, percentiles, flag shares)", w, c))
    return rows, (t, obs, blq)


def engine_profile(t, obs, blq, n):
    """cProfile of the engine on one thread; seconds per stage (cumulative), scaled to 10^6 profiles."""
    engine.THREADS = 1
    prof = cProfile.Profile()
    prof.enable()
    nca_arrays(t[:n], obs[:n], blq=blq[:n], route="extravascular", dose=MODEL.dose, lloq=MODEL.lloq)
    prof.disable()
    engine.THREADS = None
    cum = {}
    for (file, _, func), v in pstats.Stats(prof).stats.items():  # cumulative seconds of the engine's functions
        if "pkwidgets" in file:
            cum[func] = cum.get(func, 0.0) + v[3]
    groups = {
        "1 classify and BLQ rules (_classify)": ["classify_samples"],
        "2 dose-time point (_anchor)": ["anchor_at_dose_time"],
        "2 sort by time (_sorting)": ["sort_samples"],
        "3 exposure, areas (_exposure, auc)": ["measure_exposure"],
        "4 lambda z: window statistics (lambda_z)": ["_window_stats"],
        "4 lambda z: window rules (terminal_rules)": ["choose_window"],
        "4 lambda z: rest (fit, margin, candidates)": [],
        "5 regimen (_regimen)": ["regimen_values"],
        "6 derived parameters (_derived)": ["derive_parameters"],
        "7 flags, reported values, sample status (_flags)": ["review_flags", "reported_values", "sample_status"],
        "input checks (_inputs.prepare_inputs)": ["prepare_inputs"],
    }
    out = {g: sum(cum.get(f, 0.0) for f in fs) for g, fs in groups.items()}
    out["4 lambda z: rest (fit, margin, candidates)"] = (cum.get("fit_terminal_phase", 0.0)
                                                        - out["4 lambda z: window statistics (lambda_z)"]
                                                        - out["4 lambda z: window rules (terminal_rules)"])
    total = cum.get("nca_arrays", 0.0)
    out["chunk set-up, transposes, gathering of outputs"] = total - sum(out.values())
    scale = 1e6 / n
    return {g: v * scale for g, v in out.items()}, total * scale


def kernel_inputs(t, obs, blq):
    """Samples-major, compacted arrays as the engine sees them before its lambda-z and area stages."""
    value = np.where(blq, np.where(t == 0, 0.0, np.nan), obs)  # BLQ at dose time -> 0, others missing
    usable = ~np.isnan(value)
    order = np.argsort(~usable, axis=1, kind="stable")
    Ts = np.ascontiguousarray(np.take_along_axis(np.where(usable, t, np.nan), order, axis=1).T)
    Vs = np.ascontiguousarray(np.take_along_axis(value, order, axis=1).T)
    U = ~np.isnan(Vs)
    rows = np.arange(Ts.shape[0])[:, None]
    positive = U & (Vs > 0)
    i_max = np.argmax(np.where(U, Vs, -np.inf), axis=0)
    i_last = Ts.shape[0] - 1 - np.argmax(positive[::-1], axis=0)
    cand = positive & (rows > i_max) & (rows <= i_last)
    return Ts, Vs, U, cand, i_last


def numpy_stages(Ts, Vs, U, cand, i_last):
    """The engine's own NumPy code for the two stages (same calls as engine._chunk makes)."""
    P = Ts.shape[1]
    fit = fit_lambda_z_samples_major(Ts, Vs, cand, np.zeros(P, dtype=bool))
    t1, t2, c1, c2 = Ts[:-1], Ts[1:], Vs[:-1], Vs[1:]
    seg_ok = U[1:]
    is_log = segment_is_log(t1, c1, c2, "lin-up/log-down", None) & seg_ok
    a, m = segment_areas(t1, t2, c1, c2, is_log)
    A = running_sum(np.where(seg_ok, a, 0.0))
    Mm = running_sum(np.where(seg_ok, m, 0.0))
    cols = np.arange(P)
    return fit.lamz, fit.r2adj, fit.npoints, A[i_last, cols], Mm[i_last, cols]


def in_chunks(f, arrays, lambda_z_only=False):
    """``f`` over the engine's chunks of CHUNK profiles on the engine's thread count, results joined.

    ``arrays`` is a list of per-chunk tuples (each array contiguous, as the engine holds a chunk), so
    NumPy works on cache-sized pieces exactly as inside the engine.
    """
    from concurrent.futures import ThreadPoolExecutor

    def one(piece):
        if lambda_z_only:
            fit = fit_lambda_z_samples_major(piece[0], piece[1], piece[3], np.zeros(piece[0].shape[1], dtype=bool))
            return (fit.lamz,)
        return f(*piece)

    with ThreadPoolExecutor(max_workers=os.cpu_count()) as pool:
        parts = list(pool.map(one, arrays))
    return tuple(np.concatenate(x) for x in zip(*parts))


def rel_diff(a, b):
    same_nan = np.array_equal(np.isnan(a), np.isnan(b))
    ok = ~np.isnan(a) & ~np.isnan(b)
    d = np.abs(a[ok] - b[ok]) / np.maximum(np.abs(b[ok]), np.finfo(float).tiny)
    return float(d.max(initial=0.0)) if same_nan else float("inf")


def numba_experiment(t, obs, blq, repeat):
    try:
        import numba
    except ImportError:
        print("numba not importable: experiment skipped (it is not a pkwidgets dependency; "
              "install it in a scratch environment to run this part)")
        return
    Ts, Vs, U, cand, i_last = kernel_inputs(np.asarray(t), obs, blq)
    P = Ts.shape[1]
    lamz, areas = numba_kernels(numba)
    w0 = time.perf_counter()
    small = [np.ascontiguousarray(a[:, :64]) for a in (Ts, Vs, cand)]  # same array types: no second compile
    lamz(small[0], small[1], small[2], 3, 1e-4)
    areas(small[0], small[1], np.ascontiguousarray(i_last[:64]))
    compile_s = time.perf_counter() - w0
    pieces = [tuple(np.ascontiguousarray(a[..., s:s + engine.CHUNK]) for a in (Ts, Vs, U, cand, i_last))
              for s in range(0, P, engine.CHUNK)]
    w_np, c_np, (l_np, r_np, n_np, auc_np, aumc_np) = best_of(repeat, lambda: in_chunks(numpy_stages, pieces))
    w_fit, _, _ = best_of(repeat, lambda: in_chunks(None, pieces, lambda_z_only=True))
    w_lz, c_lz, (l_nb, r_nb, n_nb) = best_of(repeat, lambda: lamz(Ts, Vs, cand, 3, 1e-4))
    w_ar, c_ar, (auc_nb, aumc_nb) = best_of(repeat, lambda: areas(Ts, Vs, i_last))
    print(f"numba {numba.__version__}, {numba.get_num_threads()} threads; first-call compile {compile_s:.1f} s "
          f"(paid once per process, or cached on disk)")
    print(f"  inputs: {P:,} profiles, samples-major and compacted as the engine holds them; NumPy side in the "
          f"engine's chunks of {engine.CHUNK} on {os.cpu_count()} threads")
    print(f"  {'stage':<42} {'NumPy wall s':>12} {'numba wall s':>12} {'ratio':>7}")
    print(f"  {'lambda-z search (adjusted-R2 rule)':<42} {w_fit:>12.3f} {w_lz:>12.3f} {w_fit / w_lz:>7.1f}")
    print(f"  {'lambda-z + areas (AUC, AUMC, running sums)':<42} {w_np:>12.3f} {w_lz + w_ar:>12.3f} "
          f"{w_np / (w_lz + w_ar):>7.1f}")
    print(f"  equality: LAMZ max rel diff {rel_diff(l_nb, l_np):.1e}, R2ADJ {rel_diff(r_nb, r_np):.1e}, "
          f"LAMZNPT differs in {int(np.count_nonzero(n_nb != n_np))} profiles, "
          f"AUCLST {rel_diff(auc_nb, auc_np):.1e}, AUMCLST {rel_diff(aumc_nb, aumc_np):.1e}")
    whole_profile_ceiling(numba, np.ascontiguousarray(t), obs, blq, repeat)


def whole_profile_ceiling(numba, t, obs, blq, repeat):
    """The whole engine against a one-pass compiled kernel of this benchmark's case (a ceiling, not an engine)."""
    whole = whole_profile_kernel(numba)
    whole(t[:64].copy(), obs[:64].copy(), blq[:64].copy(), 1e-4)
    opts = dict(route="extravascular", dose=MODEL.dose, lloq=MODEL.lloq, auc_method="lin-up/log-down")
    w_eng, _, res = best_of(repeat, lambda: nca_arrays(t, obs, blq=blq, **opts))
    w_nb, _, out = best_of(repeat, lambda: whole(t, obs, blq, 1e-4))
    codes = ("CMAX", "TMAX", "TLST", "AUCLST", "LAMZ", "AUCIFO")
    diffs = ", ".join(f"{c} {rel_diff(out[:, i], res[c]):.0e}" for i, c in enumerate(codes))
    print(f"  whole profile in one compiled pass (6 codes only; the engine computes ~40 codes, flags and sample "
          f"statuses):\n  {'engine, all codes':<42} {w_eng:>12.3f} {w_nb:>12.3f} {w_eng / w_nb:>7.1f}")
    print(f"  equality with the engine: {diffs}")


_PROCESS_SETUP = """
import numpy as np
from pkwidgets import CompartmentModel, evaluate_schedule
NOMINAL = np.array({nominal})
MODEL = CompartmentModel(route="extravascular", dose=100.0, cl=5.0, v=50.0, ka=1.2,
                         variability={{"cl": 0.3, "v": 0.25, "ka": 0.4}}, proportional_error=0.12, lloq=0.05)
def work():
    evaluate_schedule(MODEL, {{"16": NOMINAL}}, n={n}, seed=1, progress=False)
"""


def compare_with(base, n, rounds):
    """``base`` against the worktree, side by side: engine and evaluate_schedule interleaved in this process
    (the code alone), then evaluate_schedule in fresh processes turn about (as shipped, heap settings included)."""
    from _side_by_side import RATIO_HEAD, alternate_processes, interleave, load_base, ratio_line, unpack

    old = load_base(base)
    per = 1e6 / n
    subjects, obs, blq = simulate_blocks(n)
    t = np.broadcast_to(NOMINAL, obs.shape)
    opts = dict(route="extravascular", dose=MODEL.dose, lloq=MODEL.lloq, auc_method="linear")
    old_model = old.CompartmentModel(**{f: getattr(MODEL, f) for f in MODEL.__dataclass_fields__})
    print(f"side by side: {base} (imported as {old.__name__}) vs this worktree, {n:,} subjects, median of {rounds} "
          "turns; seconds per 10^6 subjects x 16 samples")
    print(RATIO_HEAD)
    for threads in (1, None):
        old.engine.THREADS = engine.THREADS = threads
        res = interleave({"base": lambda: old.nca_arrays(t, obs, blq=blq, **opts),
                          "new": lambda: nca_arrays(t, obs, blq=blq, **opts)}, rounds)
        print(ratio_line(f"engine, {threads or os.cpu_count()} thread(s)", res["base"], res["new"], per), flush=True)
    res = interleave({"base": lambda: old.evaluate_schedule(old_model, {"16": NOMINAL}, n=n, seed=1, progress=False),
                      "new": lambda: evaluate_schedule(MODEL, {"16": NOMINAL}, n=n, seed=1, progress=False)}, rounds)
    print(ratio_line("evaluate_schedule end to end", res["base"], res["new"], per), flush=True)
    setup = _PROCESS_SETUP.format(nominal=NOMINAL.tolist(), n=n)
    variants = {"base": (unpack(base), {}), "default heap": (ROOT, {"PKWIDGETS_HEAP": "default"}), "new": (ROOT, {})}
    res = alternate_processes(variants, setup, rounds=max(2, rounds // 2))
    print(f"fresh process per run, turn about; base {base} as shipped (glibc's dynamic heap thresholds):")
    print(ratio_line("evaluate_schedule, new code, default heap", res["base"], res["default heap"], per))
    print(ratio_line("evaluate_schedule, as shipped", res["base"], res["new"], per))
    print(f"load average at the end: {os.getloadavg()[0]:.2f}")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=1_000_000, help="virtual subjects (default 10^6)")
    ap.add_argument("--repeat", type=int, default=3, help="runs per timing (best reported)")
    ap.add_argument("--profile-n", type=int, default=200_000, help="profiles in the cProfile run")
    ap.add_argument("--base", help="compare this commit with the worktree, side by side (ratios only)")
    ap.add_argument("--rounds", type=int, default=5, help="turns per comparison with --base (median)")
    args = ap.parse_args(argv)
    n, per = args.n, 1e6 / args.n
    if args.base:
        print(f"machine: {machine()}")
        return compare_with(args.base, n, args.rounds)
    print("pkwidgets sampling-design benchmark (synthetic one-compartment oral subjects, 16 samples)")
    print(f"machine: {machine()}")
    print(f"engine: CHUNK={engine.CHUNK}, threads={os.cpu_count()}; evaluate_schedule block 65,536, "
          f"workers={os.cpu_count()}")
    print()
    w_e2e, c_e2e, _ = best_of(args.repeat, lambda: evaluate_schedule(MODEL, {"16": NOMINAL}, n=n, seed=1,
                                                                     progress=False))
    rows, (t, obs, blq) = stages(n, args.repeat)
    print(f"{'per 10^6 subjects x 16 samples':<55} {'wall s':>8} {'cpu s':>8} {'share':>7}")
    total = sum(r[1] for r in rows)
    for name, w, c in rows:
        print(f"{name:<55} {w * per:>8.3f} {c * per:>8.3f} {w / total:>7.0%}")
    print(f"{'sum of the stages, one after another':<55} {total * per:>8.3f}")
    print(f"{'evaluate_schedule end to end (blocks on a thread pool)':<55} {w_e2e * per:>8.3f} {c_e2e * per:>8.3f}")
    print()
    groups, prof_total = engine_profile(t, obs, blq, min(args.profile_n, n))
    print(f"engine profile (cProfile, 1 thread, {min(args.profile_n, n):,} profiles; seconds scaled to 10^6, "
          f"profiler overhead included: total {prof_total:.2f} s)")
    for g, s in groups.items():
        print(f"  {g:<55} {s:>7.3f} s {s / prof_total:>6.0%}")
    print()
    numba_experiment(t[:n], obs, blq, args.repeat)
    print()
    engine_wall, cores = rows[1][1] * per, os.cpu_count() or 1
    print(f"target end to end <= {TARGET_END_TO_END:g} s per 10^6: {w_e2e * per:.2f} s wall -> "
          f"{'met' if w_e2e * per <= TARGET_END_TO_END else 'NOT met'} (CPU {c_e2e * per:.2f} s / {cores} cores = "
          f"{c_e2e * per / cores:.2f} s)")
    print(f"target engine <= {TARGET_ENGINE:g} s per 10^6: {engine_wall:.2f} s wall -> "
          f"{'met' if engine_wall <= TARGET_ENGINE else 'NOT met'} (CPU {rows[1][2] * per:.2f} s / {cores} cores = "
          f"{rows[1][2] * per / cores:.2f} s)")
    print(f"load average at the end: {os.getloadavg()[0]:.2f} (wall times on a shared machine vary by +-30 % or more; "
          "CPU time / cores is the floor an idle machine would approach)")


if __name__ == "__main__":
    main()
