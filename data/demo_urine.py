"""Write the SYNTHETIC urine demo study PKW117-UR04 (urine collections and plasma samples).

Invented scenario: compound "PKW-117" is fictional, and so is study PKW117-UR04: 12 healthy subjects,
a single oral dose of 200 mg, plasma sampled over 48 h and urine collected in intervals (a pre-dose
spot sample, then 0-2, 2-4, 4-8, 8-12, 12-24 and 24-48 h).  No real person, product or study is
described.  Values come from a one-compartment oral model with first-order absorption and renal plus
non-renal elimination (renal fraction fe of about 0.4), log-normal between-subject variability and a
proportional assay error, drawn with a fixed seed so every run writes the same files.

Files written next to this script:

``demo_urine.csv``
    study, subject, dose (mg), start and end of each collection (h after the dose), conc (ug/mL, ``BLQ``
    below ``lloq``), lloq (ug/mL), volume (mL), comment.  Irregularities on purpose: one collection whose
    volume was not recorded (empty ``volume``), and pre-dose spot samples that are BLQ.
``demo_urine_plasma.csv``
    study, subject, dose (mg), nominal_time, time (h), conc (ng/mL, ``BLQ`` below ``lloq``), lloq.

Run ``python data/demo_urine.py`` (or ``python data/make_demo.py``, which writes every demo study).
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

SEED = 20240416
HERE = os.path.dirname(os.path.abspath(__file__))
STUDY = "PKW117-UR04"
DOSE = 200.0  # mg
POP = dict(ka=1.0, cl=6.0, v=60.0, fe=0.4)  # /h, L/h, L, fraction excreted unchanged
BSV = dict(ka=0.25, cl=0.25, v=0.15, fe=0.15)
EDGES = [0.0, 2.0, 4.0, 8.0, 12.0, 24.0, 48.0]
PLASMA_TIMES = np.array([0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 16, 24, 36, 48], dtype=float)
URINE_LLOQ, PLASMA_LLOQ = 0.05, 1.0  # ug/mL, ng/mL
PROP_ERR = 0.08


def fraction_absorbed_and_excreted(t, ka, k):
    r"""Share of the renally excreted total excreted by time t (oral one-compartment; Gibaldi & Perrier).

    .. math:: A_e(t) / (f_e F D) = 1 - \frac{k_a e^{-k t} - k e^{-k_a t}}{k_a - k}
    """
    t = np.asarray(t, dtype=float)
    return 1.0 - (ka * np.exp(-k * t) - k * np.exp(-ka * t)) / (ka - k)


def plasma_conc(t, p):
    """Bateman function, ng/mL (mg/L x 1000)."""
    k = p["cl"] / p["v"]
    return 1000.0 * DOSE * p["ka"] / (p["v"] * (p["ka"] - k)) * (np.exp(-k * t) - np.exp(-p["ka"] * t))


def _text(x, lloq, fmt):
    return np.where(x < lloq, "BLQ", np.char.mod(fmt, x))


def subjects(rng, n=12):
    pars = pd.DataFrame({k: POP[k] * np.exp(rng.normal(0.0, BSV[k], n)) for k in POP})
    pars["fe"] = pars["fe"].clip(upper=0.9)
    pars["subject"] = [f"U{401 + i}" for i in range(n)]
    return pars


def urine_rows(rng, p):
    k = p["cl"] / p["v"]
    t1, t2 = np.array(EDGES[:-1]), np.array(EDGES[1:])
    amount = p["fe"] * DOSE * (fraction_absorbed_and_excreted(t2, p["ka"], k)
                               - fraction_absorbed_and_excreted(t1, p["ka"], k))  # mg
    volume = np.round(rng.lognormal(np.log(80.0 * (t2 - t1)), 0.35), 0)  # mL, about 80 mL/h
    conc = amount * 1000.0 / volume * (1.0 + rng.normal(0.0, PROP_ERR, amount.shape))  # ug/mL
    rows = pd.DataFrame({"start": t1, "end": t2, "conc": _text(conc, URINE_LLOQ, "%.4g"), "volume": volume,
                         "comment": ""})
    blank = pd.DataFrame({"start": [-1.0], "end": [0.0], "conc": ["BLQ"], "volume": [np.round(rng.uniform(40, 120))],
                          "comment": ["pre-dose spot sample"]})
    return pd.concat([blank, rows], ignore_index=True).assign(study=STUDY, subject=p["subject"], dose=DOSE,
                                                               lloq=URINE_LLOQ)


def plasma_rows(rng, p):
    c = plasma_conc(PLASMA_TIMES, p) * (1.0 + rng.normal(0.0, PROP_ERR, PLASMA_TIMES.shape))
    t = np.round(PLASMA_TIMES + np.round(rng.uniform(-3, 3, PLASMA_TIMES.shape)) / 60.0, 3)
    return pd.DataFrame({"study": STUDY, "subject": p["subject"], "dose": DOSE, "nominal_time": PLASMA_TIMES,
                         "time": t, "conc": _text(c, PLASMA_LLOQ, "%.3g"), "lloq": PLASMA_LLOQ})


def main(folder=HERE):
    """Write ``demo_urine.csv`` and ``demo_urine_plasma.csv`` into ``folder``; return their paths."""
    rng = np.random.default_rng(SEED)
    pars = subjects(rng)
    urine = pd.concat([urine_rows(rng, p) for _, p in pars.iterrows()], ignore_index=True)
    plasma = pd.concat([plasma_rows(rng, p) for _, p in pars.iterrows()], ignore_index=True)
    lost = (urine["subject"] == "U405") & (urine["start"] == 8.0)
    urine.loc[lost, ["volume", "comment"]] = [np.nan, "volume not recorded"]
    urine = urine[["study", "subject", "dose", "start", "end", "conc", "lloq", "volume", "comment"]]
    out = {}
    for name, frame in (("demo_urine.csv", urine), ("demo_urine_plasma.csv", plasma)):
        out[name] = os.path.join(folder, name)
        frame.to_csv(out[name], index=False, lineterminator="\n")
    return out


if __name__ == "__main__":
    for path in main().values():
        print(path)
