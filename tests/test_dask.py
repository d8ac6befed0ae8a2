"""pkwidgets.nca on a Dask DataFrame, run on a local distributed cluster bound to 127.0.0.1.

Sources: equality with the in-memory :func:`pkwidgets.nca` result on the
same rows (the scale-out must not change a number); the one-compartment IV
bolus identity AUC(0-inf) = Dose/CL, exact for the log-trapezoidal rule with
a log-linear extrapolation (Gibaldi & Perrier, Pharmacokinetics, 2nd ed.,
from memory; see REFERENCES in the project notes); Dask's documented
``DataFrame.shuffle(on=...)`` puts equal keys on one partition (dask docs).
Profiles are synthetic and seeded.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")

from pkwidgets import InputDataError, nca  # noqa: E402

NOMINAL = np.array([0, 0.5, 1, 2, 3, 4, 6, 8, 12, 24, 36, 48.0])


@pytest.fixture(scope="module")
def client():
    # in-process workers talking TCP on the loopback interface only (no inproc://, nothing public)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp", host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as c:
        yield c


def long_table(n_subjects=40, seed=66):
    """Synthetic oral study: subject x period, BLQ text, rows shuffled so profiles straddle partitions."""
    rng = np.random.default_rng(seed)
    rows = []
    for subj in range(1, n_subjects + 1):
        for period in (1, 2):
            cl, v, ka = 5 * np.exp(rng.normal(0, 0.3)), 50 * np.exp(rng.normal(0, 0.2)), 1.2 * np.exp(rng.normal(0, 0.4))
            k = cl / v
            c = 100 * ka / (v * (ka - k)) * (np.exp(-k * NOMINAL) - np.exp(-ka * NOMINAL))
            c = c * np.exp(rng.normal(0, 0.1, NOMINAL.size))
            for t, x in zip(NOMINAL, c):
                rows.append({"subject": f"S{subj:03d}", "period": period, "time": t,
                             "conc": "BLQ" if x < 0.1 else f"{x:.6g}", "dose": 100.0})
    df = pd.DataFrame(rows)
    return df.sample(frac=1.0, random_state=3).reset_index(drop=True)


def by_keys(frame):
    """Parameters sorted by the keys, without profile ids (they differ between partitions and memory);
    key text as plain str (dask may hold it as its own string dtype)."""
    f = getattr(frame, "parameters", frame).drop(columns="profile_id")
    f["subject"] = f["subject"].astype(object).astype(str)
    return f.sort_values(["subject", "period"]).reset_index(drop=True)


def test_dask_result_equals_in_memory(client):
    # reference: the in-memory nca() on the same rows; results must be identical
    df = long_table()
    ddf = dd.from_pandas(df, npartitions=5)
    lazy = nca(ddf, by=["subject", "period"], auc_method="lin-up/log-down")
    assert all(isinstance(f, dd.DataFrame) for f in (lazy.parameters, lazy.samples, lazy.flags))
    memory = nca(df, by=["subject", "period"], auc_method="lin-up/log-down")
    got, want = by_keys(lazy.parameters.compute()), by_keys(memory)
    assert list(got.columns) == list(want.columns)
    assert len(got) == 80
    pd.testing.assert_frame_equal(got, want, check_exact=False, rtol=1e-12, atol=0)
    # the row account and the flags travel too, and agree with the in-memory run
    rows = lazy.samples.compute()
    assert len(rows) == len(df)
    order = ["subject", "period", "time"]
    a = rows.astype({"subject": str}).sort_values(order)[["nca_used", "nca_reason", "nca_lambda_z"]]
    b = memory.samples.sort_values(order)[["nca_used", "nca_reason", "nca_lambda_z"]]
    np.testing.assert_array_equal(a.to_numpy(), b.to_numpy())
    flags = lazy.flags.compute()
    # times_sorted says the INPUT rows were out of time order: the shuffle reorders them, so it is left out
    flags, mem = flags[flags["flag"] != "times_sorted"], memory.flags[memory.flags["flag"] != "times_sorted"]
    assert sorted(zip(flags["subject"].astype(str), flags["period"], flags["flag"])) == \
        sorted(zip(mem["subject"], mem["period"], mem["flag"]))
    # compute() combines the partitions into one result looked up by key
    whole = lazy.compute()
    np.testing.assert_array_equal(whole.profile(("S007", 2)).conc, memory.profile(("S007", 2)).conc)


def test_meta_matches_computed_columns(client):
    # dask contract: the declared meta has the columns and dtypes of the computed partitions
    df = long_table(n_subjects=6)
    lazy = nca(dd.from_pandas(df, npartitions=3), by=["subject", "period"], tau=24.0, partial=[(0, 4)])
    for name in ("parameters", "samples", "flags"):
        frame = getattr(lazy, name)
        out = frame.compute()
        assert list(frame.columns) == list(out.columns), name
        assert dict(frame.dtypes) == dict(out.dtypes), name
    assert {"AUCTAU", "AUCINT_0-4"} <= set(lazy.parameters.columns)


def test_bolus_identity_through_dask(client):
    # closed form (Gibaldi & Perrier, from memory): C = Dose/V exp(-CL/V t), AUC(0-inf) = Dose/CL;
    # the log-down trapezoid with C0 back-extrapolated and CLST/lambda_z is exact on this curve
    rng = np.random.default_rng(12)
    t = np.array([0.5, 1, 2, 4, 6, 8, 12, 24.0])
    rows, expected = [], {}
    for i in range(30):
        cl, v = rng.uniform(0.5, 3.0), rng.uniform(5.0, 40.0)
        expected[f"P{i:02d}"] = 1000.0 / cl
        rows += [{"id": f"P{i:02d}", "time": x, "conc": 1000.0 / v * np.exp(-cl / v * x), "dose": 1000.0}
                 for x in t]
    ddf = dd.from_pandas(pd.DataFrame(rows).sample(frac=1.0, random_state=1), npartitions=4)
    out = nca(ddf, by="id", route="iv-bolus", auc_method="lin-up/log-down").parameters.compute().set_index("id")
    np.testing.assert_allclose(out["AUCIFO"].sort_index(), pd.Series(expected).sort_index(), rtol=1e-9)


def test_terminal_dict_for_unknown_profile_is_an_error(client):
    # bad input gets a located error, never a silently ignored entry (project rule)
    df = long_table(n_subjects=3)
    with pytest.raises(InputDataError, match="terminal names profile .*S999"):
        nca(dd.from_pandas(df, npartitions=2), by=["subject", "period"], terminal={("S999", 1): (12, 48)})


def test_terminal_dict_reaches_the_right_partition(client):
    # a per-profile window given on the dask path gives the same fit as in memory (reference: in-memory nca)
    df = long_table(n_subjects=8)
    term = {("S002", 1): (8, 48), ("S007", 2): (12, 48)}
    got = by_keys(nca(dd.from_pandas(df, npartitions=3), by=["subject", "period"], terminal=term).parameters.compute())
    want = by_keys(nca(df, by=["subject", "period"], terminal=term))
    pd.testing.assert_frame_equal(got, want, check_exact=False, rtol=1e-12, atol=0)
    row = got[(got.subject == "S002") & (got.period == 1)].iloc[0]
    assert row["LAMZLL"] >= 8 * 0.999 and row["LAMZUL"] <= 48


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:Port .* is already in use")  # the module's cluster holds 127.0.0.1:8787
def test_worker_processes_give_the_same_result():
    # the partition function and its options travel to separate worker processes (pickled) and
    # still reproduce the in-memory result (reference: in-memory nca on the same rows)
    df = long_table(n_subjects=10)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster):
        got = by_keys(nca(dd.from_pandas(df, npartitions=3), by=["subject", "period"]).parameters.compute())
    want = by_keys(nca(df, by=["subject", "period"]))
    pd.testing.assert_frame_equal(got, want, check_exact=False, rtol=1e-12, atol=0)
