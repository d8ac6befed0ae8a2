"""Row lookups down axis 0 of samples x profiles arrays, exactly as ``np.argmax(..., axis=0)`` gives them.

``np.argmax`` along axis 0 of a C-ordered (samples, profiles) array runs one
short strided search per profile; on the engine's chunks (about 17 x 8192)
that costs 5-10 times an element-wise pass.  The functions here give the
same integers from whole-array passes: a boolean mask times the row numbers
(in a small integer type) and a maximum down the rows, a contiguous
reduction.  They return ``np.intp`` like ``np.argmax``.
"""

from __future__ import annotations

import numpy as np

__all__ = ["first_true", "last_true", "argmax_rows"]


def _row_type(M):
    return np.int8 if M < 127 else np.int16 if M < 32767 else np.intp


def _top_weight(mask, weights):
    """Per column, the largest of ``weights`` (one small positive integer per row) over the True rows; 0 where none.

    A mask times the row weights in a small integer type and a maximum down the rows: a contiguous reduction.
    """
    M = mask.shape[0]
    kind = _row_type(M)
    column = np.asarray(weights, dtype=kind)[(slice(None),) + (None,) * (mask.ndim - 1)]
    return np.multiply(mask, column, dtype=kind).max(axis=0)


def first_true(mask):
    """``np.argmax(mask, axis=0)``: the first True row of each column, 0 where there is none.

    Examples
    --------
    >>> first_true(np.array([[False, False], [True, False], [True, False]]))
    array([1, 0])
    """
    M = mask.shape[0]
    if M == 0:
        return np.argmax(mask, axis=0)
    top = _top_weight(mask, np.arange(M, 0, -1))  # M - first True row; 0 where none
    out = np.subtract(M, top, dtype=np.intp)
    out[top == 0] = 0
    return out


def last_true(mask):
    """``M - 1 - np.argmax(mask[::-1], axis=0)``: the last True row of each column, ``M - 1`` where there is none.

    Examples
    --------
    >>> last_true(np.array([[True, False], [True, False], [False, False]]))
    array([1, 2])
    """
    M = mask.shape[0]
    if M == 0:
        return M - 1 - np.argmax(mask[::-1], axis=0)
    top = _top_weight(mask, np.arange(1, M + 1))  # last True row + 1; 0 where none
    out = np.subtract(top, 1, dtype=np.intp)
    out[top == 0] = M - 1
    return out


def argmax_rows(values):
    """``np.argmax(values, axis=0)`` of a float array: the first row holding each column's maximum.

    A column with NaN is left to ``np.argmax`` (its first NaN).

    Examples
    --------
    >>> argmax_rows(np.array([[1.0, -np.inf], [3.0, -np.inf], [3.0, -np.inf]]))
    array([1, 0])
    """
    if values.shape[0] == 0:
        return np.argmax(values, axis=0)
    top = values.max(axis=0)
    out = first_true(values == top)
    odd = np.isnan(top)
    if odd.any():
        out[odd] = np.argmax(values[:, odd], axis=0)
    return out
