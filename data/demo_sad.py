"""Write the SYNTHETIC single-ascending-dose demo study ``demo_sad.csv``.

Invented scenario: first-in-human study PKW117-SAD04 of the fictional
compound "PKW-117"; no real person, product or study is described.  Five
cohorts receive one oral dose of 5, 15, 50, 150 or 400 mg (6 subjects on
active drug per cohort; placebo subjects have no PK samples and are not in
the file).  Concentrations come from the population one-compartment oral
model of ``make_demo.py`` (same typical values, variability and residual
error), with one invented twist: absorption saturates at the highest doses
(bioavailability F = 1 / (1 + dose / 1500 mg)), so exposure rises slightly
less than in proportion to dose.  Fixed seed: every run writes the same file.

Columns: ``study, subject, cohort, dose`` (mg), ``nominal_time`` and ``time``
(h after the dose), ``conc`` (ng/mL, ``BLQ`` below ``lloq``), ``lloq``
(ng/mL), ``comment``.  Deliberate irregularities: one sample not collected
(S4-03 at 12 h, empty ``conc``) and one sample drawn late (S2-05 at 4.5 h
instead of 4 h).

Run ``python data/demo_sad.py`` (also run by ``python data/make_demo.py``).
"""

from __future__ import annotations

import importlib.util
import os

import numpy as np
import pandas as pd

SEED = 20240321
HERE = os.path.dirname(os.path.abspath(__file__))
STUDY = "PKW117-SAD04"
DOSES = (5.0, 15.0, 50.0, 150.0, 400.0)  # mg, cohorts 1-5
PER_COHORT = 6
TIMES = np.array([0, 0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 24, 36, 48, 72], dtype=float)
F_HALF = 1500.0  # mg: dose at which the invented saturable absorption halves F
LATE = {("S2-05", 4.0): 4.5}
MISSED = {("S4-03", 12.0)}


def _model():
    """The shared population model of the demo studies (``make_demo.py`` beside this file)."""
    spec = importlib.util.spec_from_file_location("_pkw_make_demo", os.path.join(HERE, "make_demo.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def study(rng) -> pd.DataFrame:
    """One row per sample of the five cohorts."""
    m = _model()
    frames = []
    for cohort, dose in enumerate(DOSES, start=1):
        f = 1.0 / (1.0 + dose / F_HALF)
        for i, (_, p) in enumerate(m.individuals(rng, PER_COHORT).iterrows(), start=1):
            subject = f"S{cohort}-{i:02d}"
            jitter = np.round(rng.uniform(-3, 3, TIMES.shape)) / 60.0
            t = np.round(np.where(TIMES > 0, TIMES + jitter, TIMES), 3)
            comment = np.full(TIMES.shape, "", dtype=object)
            for (s, nominal), actual in LATE.items():
                if s == subject:
                    t[TIMES == nominal], comment[TIMES == nominal] = actual, "sampled late"
            conc = m.observe(rng, m.oral_conc(t, dose, p.ka, p.cl, p.v, p.tlag, f=f)).astype(object)
            for s, nominal in MISSED:
                if s == subject:
                    conc[TIMES == nominal], comment[TIMES == nominal] = "", "sample not collected"
            frames.append(pd.DataFrame({"study": STUDY, "subject": subject, "cohort": cohort, "dose": dose,
                                        "nominal_time": TIMES, "time": t, "conc": conc, "lloq": m.LLOQ,
                                        "comment": comment}))
    return pd.concat(frames, ignore_index=True)


def main(folder=HERE) -> str:
    """Write ``demo_sad.csv`` into ``folder`` (own seed); return its path."""
    path = os.path.join(folder, "demo_sad.csv")
    study(np.random.default_rng(SEED)).to_csv(path, index=False, lineterminator="\n")
    return path


if __name__ == "__main__":
    print(main())
