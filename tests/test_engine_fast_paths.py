"""The engine's fast paths give what the plain NumPy/SciPy calls they replace give, value for value.

Sources, beside each check:

- ``numpy.argmax`` (first occurrence of the maximum; the first NaN where
  there is one) and ``numpy.argsort(kind="stable")``: the NumPy reference
  documentation;
- ``scipy.stats.t.ppf``: the Student t quantile, SciPy;
- ``mallopt(3)``: glibc's heap thresholds (Linux manual pages); the heap
  settings must not change any result.
"""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from pkwidgets._rows import argmax_rows, first_true, last_true
from pkwidgets._sorting import _destinations
from pkwidgets._terminal import _t_quantile


@pytest.mark.parametrize("rows", [1, 2, 17, 126, 127, 200])
def test_row_lookups_equal_numpy_argmax(rows):
    rng = np.random.default_rng(rows)
    mask = rng.random((rows, 500)) < rng.choice([0.0, 0.05, 0.5, 1.0], 500)  # some columns all False / all True
    # numpy.argmax: index of the first True (0 for an all-False column) -- NumPy reference
    np.testing.assert_array_equal(first_true(mask), np.argmax(mask, axis=0))
    np.testing.assert_array_equal(last_true(mask), rows - 1 - np.argmax(mask[::-1], axis=0))
    assert first_true(mask).dtype == np.argmax(mask, axis=0).dtype
    values = np.where(mask, rng.integers(0, 4, mask.shape).astype(float), -np.inf)  # ties and -inf columns
    values[:, :3] = np.nan  # numpy.argmax gives the first NaN
    values[1:, 3] = np.nan
    values[0, 4] = -0.0  # -0.0 == 0.0: the first of either
    values[-1, 4] = 0.0
    np.testing.assert_array_equal(argmax_rows(values), np.argmax(values, axis=0))


def test_lambda_z_margin_quantiles_equal_scipy_per_profile():
    df = np.array([0, 1, 2, 3, 7, 14, 1, 0, 5], dtype=np.int64)
    # scipy.stats.t.ppf called on every profile, as the engine did before the lookup
    np.testing.assert_array_equal(_t_quantile(0.975, df), stats.t.ppf(0.975, np.maximum(df, 1)))
    assert _t_quantile(0.975, np.zeros(0, dtype=np.int64)).shape == (0,)


def test_partition_order_equals_a_stable_argsort():
    rng = np.random.default_rng(7)
    M, P = 12, 400
    T = np.sort(rng.uniform(0, 48, (M, P)), axis=0)
    T[0] = 0.0
    shuffled = rng.random(P) < 0.3
    T[:, shuffled] = rng.permuted(T[:, shuffled], axis=0)  # out of time order
    T[3, :50] = T[2, :50]  # equal neighbours
    U = rng.random((M, P)) < 0.8
    dest, n_usable, Ts = _destinations(T, U)
    # numpy.argsort(kind="stable") of the times with the unusable cells last -- NumPy reference
    order = np.argsort(np.where(U, T, np.inf), axis=0, kind="stable")
    gathered = order * P + np.arange(P)
    np.testing.assert_array_equal(dest.reshape(-1)[gathered.reshape(-1)], np.arange(M * P))
    np.testing.assert_array_equal(Ts, np.take_along_axis(T, order, axis=0))
    np.testing.assert_array_equal(n_usable, U.sum(axis=0))


def _engine_digest(env_extra):
    code = (
        "import numpy as np, hashlib, pkwidgets, pkwidgets._memory as m\n"
        "rng = np.random.default_rng(3)\n"
        "t = np.tile([0, .5, 1, 2, 4, 8, 12, 24.0], (20000, 1))\n"
        "c = 10 * np.exp(-0.1 * t) * np.exp(rng.normal(0, .1, t.shape)) * (1 - np.exp(-2 * t))\n"
        "r = pkwidgets.nca_arrays(t, c, dose=100.0)\n"
        "h = hashlib.sha256()\n"
        "[h.update(np.ascontiguousarray(r[k]).tobytes()) for k in r]\n"
        "h.update(r.status.tobytes())\n"
        "print(m.keep_heap(), h.hexdigest())\n"
    )
    env = dict(os.environ, **env_extra)
    env.pop("MALLOC_MMAP_THRESHOLD_", None)
    env.pop("MALLOC_TRIM_THRESHOLD_", None)
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    applied, digest = out.stdout.split()
    return applied == "True", digest


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc heap settings apply on Linux only")
def test_heap_settings_change_no_result_and_can_be_switched_off():
    kept, with_setting = _engine_digest({})
    off, without = _engine_digest({"PKWIDGETS_HEAP": "default"})
    assert not off  # PKWIDGETS_HEAP=default: glibc's own thresholds stay
    assert with_setting == without  # every parameter and sample status, byte for byte
    if os.confstr("CS_GNU_LIBC_VERSION").startswith("glibc"):
        assert kept



def test_thread_settings_and_cached_t_tables_change_no_result():
    """Threads over chunks (``engine.chunk_threads``) change no result, and the per-thread setting is restored;
    the terminal rule's cached bound tables equal ``scipy.stats.t.ppf`` (SciPy) level by level."""
    import threading

    from pkwidgets import engine, nca_arrays, terminal_rules

    rng = np.random.default_rng(11)
    t = np.array([0.5, 1, 2, 4, 6, 8, 12, 24.0]) * np.ones((3 * engine.CHUNK // 2, 1))  # two chunks
    c = 10 * np.exp(-0.1 * t) * np.exp(rng.normal(0, 0.1, t.shape))
    default = nca_arrays(t, c, dose=100)
    seen = []

    def one_thread():
        with engine.chunk_threads(1):
            seen.append(nca_arrays(t, c, dose=100))
        seen.append(getattr(engine._LOCAL, "threads", None))

    worker = threading.Thread(target=one_thread)
    worker.start()
    worker.join()
    assert seen[1] is None  # restored
    for code in default:
        np.testing.assert_array_equal(seen[0][code], default[code])
    up, neg_lo, neg_firm_lo, firm_up = terminal_rules._bounds((0.7, 0.9), 12)
    n = np.arange(14)
    df = np.maximum(n - 2, 1)
    wide = n >= terminal_rules.WIDE_WINDOW
    np.testing.assert_array_equal(up, np.where(wide, stats.t.ppf(max(0.7, terminal_rules.WIDE_ABOVE_LEVEL), df),
                                               stats.t.ppf(0.7, df)))
    np.testing.assert_array_equal(-neg_lo, stats.t.ppf(0.9, df))
    np.testing.assert_array_equal(firm_up, stats.t.ppf(max(0.7, terminal_rules.FIRM_ABOVE_LEVEL), df))
    assert not up.flags.writeable  # shared between chunks: read-only
