"""Write the SYNTHETIC toxicokinetic demo study PKW117-TK05 (sparse, destructive sampling in rats).

Invented scenario: compound "PKW-117" is fictional, and so is study PKW117-TK05: a single oral gavage
dose of 5, 25 or 100 mg/kg to male and female rats, one terminal blood sample per animal, 3 animals
per sex, dose and time point (0.25, 0.5, 1, 2, 4, 8 and 24 h): 126 animals.  No real animal, product or
study is described.  Concentrations come from a one-compartment oral model (females with a 30 % lower
clearance, exposure slightly more than dose-proportional at 100 mg/kg), log-normal between-animal
variability and a proportional assay error, drawn with a fixed seed so every run writes the same file.

File written next to this script:

``demo_tk.csv``
    study, animal, sex, dose (mg/kg), nominal_time (h), time (actual, h), conc (ng/mL, ``BLQ`` below
    ``lloq``), lloq (ng/mL), comment.  Irregularities on purpose: one sample lost (empty ``conc``) and
    BLQ values at 24 h in the low dose group.

Run ``python data/demo_tk.py`` (or ``python data/make_demo.py``, which writes every demo study).
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

SEED = 20240521
HERE = os.path.dirname(os.path.abspath(__file__))
STUDY = "PKW117-TK05"
TIMES = np.array([0.25, 0.5, 1, 2, 4, 8, 24], dtype=float)
DOSES = (5.0, 25.0, 100.0)  # mg/kg
PER_TIME = 3
LLOQ = 1.0  # ng/mL
POP = dict(ka=2.0, cl=1.2, v=2.5)  # /h, L/h/kg, L/kg
BSV = 0.3  # SD of log concentration between animals (one sample per animal)
PROP_ERR = 0.08


def conc(t, dose, sex):
    """Mean concentration, ng/mL: Bateman function with sex and dose effects on clearance."""
    cl = POP["cl"] * (0.7 if sex == "F" else 1.0) * (0.85 if dose >= 100 else 1.0)
    k, ka, v = cl / POP["v"], POP["ka"], POP["v"]
    return 1000.0 * dose * ka / (v * (ka - k)) * (np.exp(-k * t) - np.exp(-ka * t))


def main(folder=HERE):
    """Write ``demo_tk.csv`` into ``folder``; return its path in a dict."""
    rng = np.random.default_rng(SEED)
    rows, n = [], 0
    for dose in DOSES:
        for sex in ("M", "F"):
            for t in TIMES:
                for _ in range(PER_TIME):
                    n += 1
                    c = conc(t, dose, sex) * np.exp(rng.normal(0.0, BSV)) * (1.0 + rng.normal(0.0, PROP_ERR))
                    actual = round(t + round(rng.uniform(-2, 2)) / 60.0, 3)
                    rows.append(dict(study=STUDY, animal=f"R{n:03d}{sex}", sex=sex, dose=dose, nominal_time=t,
                                     time=actual, conc="BLQ" if c < LLOQ else f"{c:.4g}", lloq=LLOQ, comment=""))
    frame = pd.DataFrame(rows)
    lost = frame.index[(frame["dose"] == 25.0) & (frame["sex"] == "F") & (frame["nominal_time"] == 2.0)][0]
    frame.loc[lost, ["conc", "comment"]] = ["", "sample lost (haemolysed)"]
    path = os.path.join(folder, "demo_tk.csv")
    frame.to_csv(path, index=False, lineterminator="\n")
    return {"demo_tk.csv": path}


if __name__ == "__main__":
    for p in main().values():
        print(p)
