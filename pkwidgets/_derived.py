"""Stage 6 of the engine: every derived parameter, from its formula in the catalogue.

Derived parameters (AUCIFO, CL, V, MRT, dose-normalised values, ...) are
declared with their ``derive`` formula next to their entry in
:data:`pkwidgets.parameters.PARAMETERS`; this stage evaluates the formulas of
the codes a run returns in dependency order
(:func:`pkwidgets.parameters.derivation_order`, decided once per call of
:func:`pkwidgets.nca_arrays`), vectorised over profiles.
Division by zero and overflow give inf or NaN here; the flags stage turns
inf into NaN with the flag ``nonfinite_result``.
"""

from __future__ import annotations

import numpy as np

from .parameters import PARAMETERS

__all__ = ["derive_parameters"]


def derive_parameters(measured: dict, inputs: dict, derived) -> dict:
    """Measured values plus the ``derived`` codes, each from its catalogue formula.

    Parameters
    ----------
    measured : dict of str to ndarray
        Values by code from the earlier stages (CMAX, AUCLST, LAMZ, ...).
    inputs : dict of str to ndarray
        Per-profile inputs named in :data:`pkwidgets.parameters.DERIVE_INPUTS`.
    derived : sequence of str
        Codes to derive, each after those it is computed from (a sub-list of
        :func:`pkwidgets.parameters.derivation_order`).

    Returns
    -------
    dict of str to ndarray
        ``measured`` with the derived codes added.

    Examples
    --------
    >>> import numpy as np
    >>> out = derive_parameters({"AUCLST": np.array([10.0]), "CLST": np.array([1.0]),
    ...                          "LAMZ": np.array([0.5])}, {}, ["AUCIFO"])
    >>> float(out["AUCIFO"][0])   # AUCLST + CLST / LAMZ
    12.0
    """
    values = dict(measured)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for code in derived:
            entry = PARAMETERS[code]
            values[code] = entry.derive(*[values[n] if n in PARAMETERS else inputs[n] for n in entry.inputs])
    return values
