r"""Fingerprints of what a lambda-z fit sees, and canonical profile keys.

A hand-made choice (a window, excluded times) is only valid for the data it
was made on.  :func:`profile_fingerprint` hashes everything that changes the
fit of one profile: times, concentrations, BLQ marks, the LLOQ of each BLQ
sample (it is substituted under the ``"lloq"`` and ``"half-lloq"`` rules and
tells ``<0.5`` from ``<0.05``), the BLQ rules and the area method.  The dose,
the route and the QC thresholds are not part of it (they do not change which
points are fitted or their values).
"""

from __future__ import annotations

import hashlib
import math

import numpy as np

from .blq import BLQRules
from .options import AUC_METHODS, check_choice

__all__ = ["profile_fingerprint", "canonical_key", "FINGERPRINT_FORM", "FINGERPRINT_VERSION"]

#: Version of the canonical form below (form 1, before 0.2, left out LLOQ, rules and method).
FINGERPRINT_VERSION = 2
FINGERPRINT_FORM = (
    "SHA-256 (hex) of UTF-8 text, lines joined by '\\n'. Line 1: 'pkwidgets-fingerprint 2;auc_method=M;"
    "blq_rules=before:R,between:R,after:R'. Then one line per sample with a time, sorted by time: "
    "'time;conc;blq;lloq' with numbers as float64 in float.hex() form (-0.0 written as 0.0, NaN as 'nan'); "
    "conc written 'blq' and blq 1 for a BLQ sample (else blq 0); lloq is the LLOQ of a BLQ sample ('nan' when "
    "unknown) and '-' for a measured one; samples without a time are left out"
)


def _hex(x: float) -> str:
    x = float(x)
    if math.isnan(x):
        return "nan"
    return (x + 0.0).hex()


def _per_sample(values, shape, name, dtype):
    if values is None:
        return np.full(shape, np.nan if dtype is np.float64 else False, dtype=dtype)
    a = np.asarray(values, dtype=dtype)
    if a.ndim == 0:
        return np.full(shape, a, dtype=dtype)
    a = a.ravel()
    if a.shape != shape:
        raise ValueError(f"{name} has {a.size} values but time has {shape[0]}; they must match (or give one {name}).")
    return a


def _header(blq_rules, auc_method) -> str:
    method = "linear" if auc_method is None else check_choice("The 'auc_method' option", auc_method, AUC_METHODS)
    r = BLQRules.coerce(blq_rules)
    return (f"pkwidgets-fingerprint {FINGERPRINT_VERSION};auc_method={method};"
            f"blq_rules=before:{r.before},between:{r.between},after:{r.after}")


def profile_fingerprint(time, conc, blq=None, *, lloq=None, blq_rules=None, auc_method=None) -> str:
    r"""SHA-256 fingerprint of what the lambda-z fit of one profile sees.

    Parameters
    ----------
    time, conc : array_like, 1-D
        Sampling times after the dose and concentrations (NaN = missing);
        NaN-padded entries (no time) are ignored.
    blq : array_like of bool, optional
        True where the sample is below the LLOQ (its conc value is then not
        part of the fingerprint, as the engine ignores it; its LLOQ is).
    lloq : float or array_like, optional
        LLOQ, one for the profile or one per sample; only BLQ samples' values
        enter the fingerprint.  None: unknown (NaN).
    blq_rules : BLQRules or dict, optional
        None: the default rules (:class:`pkwidgets.blq.BLQRules`).
    auc_method : str, optional
        None: ``"linear"``, the default of :func:`pkwidgets.nca`.

    Returns
    -------
    str
        64 hexadecimal characters.

    Notes
    -----
    Canonical form (:data:`FINGERPRINT_FORM`): a first line naming the form
    version, the area method and the three BLQ rules; then one line per
    sample that has a time, sorted by time, ``time;conc;blq;lloq``, numbers
    written with :meth:`float.hex` (exact for float64, independent of
    platform and locale), ``-0.0`` as ``0.0``, NaN as ``nan``; a BLQ
    sample's conc as ``blq``, the BLQ mark as ``1``/``0``; the LLOQ of a BLQ
    sample, ``-`` for a measured one.  The text is encoded as UTF-8 and
    hashed with SHA-256 (FIPS 180-4).  Row order does not change it; a
    change of a time, conc, BLQ mark, BLQ LLOQ, rule or method does.

    Examples
    --------
    >>> a = profile_fingerprint([0, 1, 2], [0.0, 5.0, 2.5])
    >>> a == profile_fingerprint([2, 0, 1], [2.5, 0.0, 5.0])
    True
    >>> a == profile_fingerprint([0, 1, 2], [0.0, 5.0, 2.6])
    False
    >>> b = profile_fingerprint([0, 1, 2], [0.0, 5.0, np.nan], [False, False, True], lloq=0.5)
    >>> b == profile_fingerprint([0, 1, 2], [0.0, 5.0, np.nan], [False, False, True], lloq=0.05)
    False
    >>> a == profile_fingerprint([0, 1, 2], [0.0, 5.0, 2.5], auc_method="lin-up/log-down")
    False
    """
    t = np.asarray(time, dtype=np.float64).ravel()
    c = np.asarray(conc, dtype=np.float64).ravel()
    if t.shape != c.shape:
        raise ValueError(f"time has {t.size} values but conc has {c.size}; they must match.")
    b = _per_sample(blq, t.shape, "blq", bool)
    lq = _per_sample(lloq, t.shape, "lloq", np.float64)
    keep = ~np.isnan(t)
    order = np.argsort(t[keep], kind="stable")
    tk, ck, bk, lk = t[keep][order], c[keep][order], b[keep][order], lq[keep][order]
    lines = [_header(blq_rules, auc_method)]
    lines += [f"{_hex(ti)};blq;1;{_hex(li)}" if bi else f"{_hex(ti)};{_hex(ci)};0;-"
              for ti, ci, bi, li in zip(tk, ck, bk, lk)]
    return hashlib.sha256("\n".join(lines).encode("utf-8")).hexdigest()


def canonical_key(key) -> tuple:
    """Profile key as a tuple of text, one item per ``by`` column.

    Parameters
    ----------
    key : scalar, or list, tuple or 1-D array of scalars
        One value per ``by`` column; a scalar is a one-column key.

    Returns
    -------
    tuple of str
        ``str(value).strip()`` of each item (NumPy scalars first turned into
        Python ones), so the integer ``1`` of a DataFrame and the text ``"1"``
        read from a CSV file name the same profile.

    Examples
    --------
    >>> canonical_key(1)
    ('1',)
    >>> canonical_key(("1", " A"))
    ('1', 'A')
    """
    if isinstance(key, (list, tuple, np.ndarray)):
        items = np.ravel(key).tolist() if isinstance(key, np.ndarray) else key
    else:
        items = (key,)
    out = []
    for v in items:
        if isinstance(v, (np.generic,)):
            v = v.item()
        out.append(str(v).strip())
    return tuple(out)
