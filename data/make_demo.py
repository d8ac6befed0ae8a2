"""Write the three SYNTHETIC demo studies used by the analysis notebooks.

Invented scenario: compound "PKW-117" is fictional, as are the study codes
PKW117-SD01, PKW117-MD02 and PKW117-MR03.  No real person, product or study
is described.  Concentrations come from a population one-compartment oral
model (first-order absorption with a lag, first-order elimination) with
log-normal between-subject variability and a combined proportional and
additive residual error, drawn with a fixed seed so that every run writes
the same files.

Files written next to this script:

``demo_single_dose.csv``
    PKW117-SD01: single oral dose at 10, 30 and 100 mg, 6 subjects per level.
``demo_multiple_dose.csv``
    PKW117-MD02: 50 mg every 12 h for 7 days, 12 subjects; a first-dose
    profile on day 1 and a steady-state profile on day 7 (times after the
    dose of that day; pre-dose sample at 0 on day 7).
``demo_partial_auc.csv``
    PKW117-MR03: two-period crossover, 12 subjects, 40 mg immediate-release
    reference (R) and a biphasic modified-release test (T).

Every file has: ``nominal_time`` (planned, h) and ``time`` (actual time
after the dose, h), ``conc`` (ng/mL, ``BLQ`` below ``lloq``), ``lloq``
(ng/mL), ``dose`` (mg) and ``comment``.  Deliberate irregularities, as in
real studies: one missed sample per study (empty ``conc``, comment "sample
not collected") and one actual-time deviation (comment "sampled late").

Run ``python data/make_demo.py``.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd

SEED = 20240117
LLOQ = 1.0  # ng/mL, stated lower limit of quantitation for all three studies
HERE = os.path.dirname(os.path.abspath(__file__))

# typical values (h, L, L/h) and between-subject SD of log values (about 30 % CV)
POP = dict(ka=1.2, cl=5.0, v=50.0, tlag=0.15)
BSV = dict(ka=0.3, cl=0.3, v=0.2, tlag=0.2)
PROP_ERR = 0.10  # proportional residual SD
ADD_ERR = 0.2  # additive residual SD, ng/mL


def individuals(rng, n):
    """Draw ``n`` subjects' parameters (log-normal around the typical values)."""
    return pd.DataFrame({k: POP[k] * np.exp(rng.normal(0.0, BSV[k], n)) for k in POP})


def oral_conc(t, dose_mg, ka, cl, v, tlag, f=1.0):
    r"""One-compartment oral concentration (ng/mL) after one dose at time 0.

    .. math:: C(t) = \frac{F D k_a}{V (k_a - k)} (e^{-k t'} - e^{-k_a t'}), \quad t' = t - t_{lag}

    (Bateman function; Gibaldi & Perrier, Pharmacokinetics, 2nd ed.).  mg/L
    is converted to ng/mL (x 1000).
    """
    k = cl / v
    tt = np.clip(np.asarray(t, dtype=float) - tlag, 0.0, None)
    return 1000.0 * f * dose_mg * ka / (v * (ka - k)) * (np.exp(-k * tt) - np.exp(-ka * tt))


def observe(rng, c):
    """Add residual error and report values below the LLOQ as text ``BLQ``."""
    y = c * (1.0 + rng.normal(0.0, PROP_ERR, c.shape)) + rng.normal(0.0, ADD_ERR, c.shape)
    return np.where(y < LLOQ, "BLQ", np.char.mod("%.3g", np.maximum(y, 0.0)))


#: (study, subject, day or treatment, nominal time) -> actual time: one late sample per study
LATE = {("PKW117-SD01", "S109", None, 8.0): 8.75,
        ("PKW117-MD02", "M208", 1, 6.0): 6.5,
        ("PKW117-MR03", "R303", "R", 2.0): 2.4}
#: (study, subject, day or treatment, nominal time) of the sample not collected
MISSED = {("PKW117-SD01", "S104", None, 6.0), ("PKW117-MD02", "M205", 7, 3.0), ("PKW117-MR03", "R306", "T", 10.0)}


def actual_times(rng, nominal, key):
    """Actual times: nominal plus up to a few minutes' jitter (none at pre-dose), and the listed late sample."""
    jitter = np.round(rng.uniform(-3, 3, nominal.shape)) / 60.0
    t = np.round(np.where(nominal > 0, nominal + jitter, nominal), 3)
    if key[0] == "PKW117-MD02":  # the end-of-interval sample is drawn just before the next dose
        t[nominal == nominal.max()] = nominal.max()
    for (study, subj, extra, nom), actual in LATE.items():
        if (study, subj, extra) == key:
            t[nominal == nom] = actual
    return t


def mark_irregular(df, study, extra_col=None):
    """Comment the late sample; blank the missed one."""
    extra = df[extra_col] if extra_col else pd.Series([None] * len(df))
    for s, subj, x, nom in MISSED:
        if s == study:
            hit = (df["subject"] == subj) & (df["nominal_time"] == nom) & ((extra == x) | (x is None))
            df.loc[hit, ["conc", "comment"]] = ["", "sample not collected"]
    for (s, subj, x, nom) in LATE:
        if s == study:
            hit = (df["subject"] == subj) & (df["nominal_time"] == nom) & ((extra == x) | (x is None))
            df.loc[hit, "comment"] = "sampled late"
    return df


def single_dose(rng):
    times = np.array([0, 0.25, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12, 24, 36, 48], dtype=float)
    rows = []
    subj = 100
    for dose in (10.0, 30.0, 100.0):
        ind = individuals(rng, 6)
        for _, p in ind.iterrows():
            subj += 1
            t = actual_times(rng, times, ("PKW117-SD01", f"S{subj}", None))
            rows.append(pd.DataFrame({
                "study": "PKW117-SD01", "subject": f"S{subj}", "dose": dose, "nominal_time": times, "time": t,
                "conc": observe(rng, oral_conc(t, dose, p.ka, p.cl, p.v, p.tlag)), "lloq": LLOQ, "comment": ""}))
    return mark_irregular(pd.concat(rows, ignore_index=True), "PKW117-SD01")


def multiple_dose(rng):
    tau, dose, ndays = 12.0, 50.0, 7
    times = np.array([0, 0.5, 1, 1.5, 2, 3, 4, 6, 8, 12], dtype=float)
    rows = []
    for i, (_, p) in enumerate(individuals(rng, 12).iterrows()):
        for day in (1, ndays):
            t = actual_times(rng, times, ("PKW117-MD02", f"M{201 + i}", day))
            first = (day - 1) * 24.0  # first dose of the day, hours since the first dose of the study
            # superposition of every dose given up to the sample (doses at 0, tau, 2 tau, ...)
            doses = np.arange(0.0, first + 1e-9, tau)
            c = sum(oral_conc(first + t - d, dose, p.ka, p.cl, p.v, p.tlag) * (first + t - d >= 0) for d in doses)
            rows.append(pd.DataFrame({
                "study": "PKW117-MD02", "subject": f"M{201 + i}", "day": day, "dose": dose, "tau": tau,
                "nominal_time": times, "time": t, "conc": observe(rng, c), "lloq": LLOQ, "comment": ""}))
    return mark_irregular(pd.concat(rows, ignore_index=True), "PKW117-MD02", "day")


def partial_auc_study(rng):
    times = np.array([0, 0.25, 0.5, 0.75, 1, 1.5, 2, 3, 4, 6, 8, 10, 12, 16, 24, 36], dtype=float)
    dose = 40.0
    rows = []
    for i, (_, p) in enumerate(individuals(rng, 12).iterrows()):
        seq = "TR" if i % 2 == 0 else "RT"
        for period, trt in enumerate(seq, start=1):
            t = actual_times(rng, times, ("PKW117-MR03", f"R{301 + i}", trt))
            if trt == "R":
                c = oral_conc(t, dose, p.ka, p.cl, p.v, p.tlag)
            else:  # biphasic test: 35 % released at once, 65 % released slowly (apparent ka / 6)
                c = (oral_conc(t, dose, p.ka, p.cl, p.v, p.tlag, f=0.35)
                     + oral_conc(t, dose, p.ka / 6.0, p.cl, p.v, p.tlag, f=0.65))
            rows.append(pd.DataFrame({
                "study": "PKW117-MR03", "subject": f"R{301 + i}", "sequence": seq, "period": period,
                "treatment": trt, "dose": dose, "nominal_time": times, "time": t, "conc": observe(rng, c),
                "lloq": LLOQ, "comment": ""}))
    return mark_irregular(pd.concat(rows, ignore_index=True), "PKW117-MR03", "treatment")


def main(folder=HERE):
    """Write the three demo CSV files into ``folder``; return their paths."""
    rng = np.random.default_rng(SEED)
    out = {}
    for name, make in (("demo_single_dose.csv", single_dose), ("demo_multiple_dose.csv", multiple_dose),
                       ("demo_partial_auc.csv", partial_auc_study)):
        path = os.path.join(folder, name)
        make(rng).to_csv(path, index=False, lineterminator="\n")
        out[name] = path
    import demo_tk  # urine (PKW117-UR04) and toxicokinetic (PKW117-TK05) studies: own seeds, files beside this one
    import demo_urine
    out.update(demo_urine.main(folder))
    out.update(demo_tk.main(folder))
    from demo_sad import main as write_sad  # PKW117-SAD04, single ascending dose (own seed)
    out["demo_sad.csv"] = write_sad(folder)
    return out


if __name__ == "__main__":
    for p in main().values():
        print(p)
