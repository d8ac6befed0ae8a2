"""Write the SYNTHETIC single-dose demo study PKW117-SD01 as SDTM-shaped PC and EX domains.

Input: ``demo_single_dose.csv`` (synthetic, written by ``make_demo.py``; fictional compound PKW-117).
Output: ``demo_sdtm_pc.csv`` and ``demo_sdtm_ex.csv`` in this folder.  Deterministic (no random draw):

- each subject's oral dose at 08:00, six subjects a day from 2025-03-10 (invented dates);
- PCDTC = dose date-time + the actual time of the CSV, to the second; PCELTM/PCTPTNUM = planned time;
- the sample "not collected" keeps no date-time, PCSTAT "NOT DONE" (read_sdtm lists it as unplaced);
- two invented placebo subjects (S119, S120, EXDOSE 0, every sample BLQ) show how placebo rows are
  reported.

Run: ``python data/make_demo_sdtm.py``.  All values are synthetic; no real person, product or study.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd

HERE = Path(__file__).resolve().parent
STUDY = "PKW117-SD01"
START = pd.Timestamp("2025-03-10T08:00")


def _iso_hours(h: float) -> str:
    return f"PT{h:g}H"


def _subjects(sd: pd.DataFrame) -> pd.DataFrame:
    subj = sd[["subject", "dose"]].drop_duplicates().reset_index(drop=True)
    placebo = pd.DataFrame({"subject": ["S119", "S120"], "dose": [0.0, 0.0]})
    subj = pd.concat([subj, placebo], ignore_index=True)
    subj["dose_dt"] = [START + pd.Timedelta(days=i // 6) for i in range(len(subj))]
    return subj


def _placebo_rows(sd: pd.DataFrame) -> pd.DataFrame:
    template = sd[sd["subject"] == sd["subject"].iloc[0]]
    rows = [template.assign(subject=s, dose=0.0, time=template["nominal_time"], conc="BLQ", comment="")
            for s in ("S119", "S120")]
    return pd.concat(rows, ignore_index=True)


def pc_domain(sd: pd.DataFrame, subj: pd.DataFrame) -> pd.DataFrame:
    sd = pd.concat([sd, _placebo_rows(sd)], ignore_index=True)
    dose_dt = sd["subject"].map(subj.set_index("subject")["dose_dt"])
    taken = sd["conc"].notna() & (sd["conc"].astype(str) != "")
    when = dose_dt + pd.to_timedelta((sd["time"].astype(float) * 3600).round(), unit="s")
    text = sd["conc"].fillna("").astype(str)
    number = pd.to_numeric(text, errors="coerce")
    pc = pd.DataFrame({
        "STUDYID": STUDY, "DOMAIN": "PC", "USUBJID": STUDY + "-" + sd["subject"],
        "PCSEQ": sd.groupby("subject").cumcount() + 1, "PCTESTCD": "PKW117", "PCTEST": "PKW-117",
        "PCORRES": text, "PCORRESU": "ng/mL", "PCSTRESC": text, "PCSTRESN": number, "PCSTRESU": "ng/mL",
        "PCSTAT": (~taken).map({True: "NOT DONE", False: ""}),
        "PCREASND": (~taken).map({True: "SAMPLE NOT COLLECTED", False: ""}),
        "PCSPEC": "PLASMA", "PCLLOQ": sd["lloq"].astype(float),
        "PCDTC": when.dt.strftime("%Y-%m-%dT%H:%M:%S").where(taken, ""),
        "PCTPT": sd["nominal_time"].map(lambda h: f"{h:g} H AFTER DOSE"),
        "PCTPTNUM": sd["nominal_time"].astype(float), "PCELTM": sd["nominal_time"].map(_iso_hours)})
    return pc


def ex_domain(subj: pd.DataFrame) -> pd.DataFrame:
    start = subj["dose_dt"].dt.strftime("%Y-%m-%dT%H:%M")
    return pd.DataFrame({
        "STUDYID": STUDY, "DOMAIN": "EX", "USUBJID": STUDY + "-" + subj["subject"], "EXSEQ": 1,
        "EXTRT": subj["dose"].map(lambda d: "PLACEBO" if d == 0 else "PKW-117"), "EXDOSE": subj["dose"],
        "EXDOSU": "mg", "EXDOSFRM": "TABLET", "EXDOSFRQ": "ONCE", "EXROUTE": "ORAL",
        "EXSTDTC": start, "EXENDTC": start})


def main(folder=HERE):
    sd = pd.read_csv(Path(folder) / "demo_single_dose.csv", keep_default_na=False, na_values={"conc": [""]})
    subj = _subjects(sd)
    pc_domain(sd, subj).to_csv(Path(folder) / "demo_sdtm_pc.csv", index=False, lineterminator="\n")
    ex_domain(subj).to_csv(Path(folder) / "demo_sdtm_ex.csv", index=False, lineterminator="\n")


if __name__ == "__main__":
    main()
