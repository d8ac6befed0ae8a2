"""Stage 6 of the engine: every derived parameter, from its formula in the catalogue.

Derived parameters (AUCIFO, CL, V, MRT, dose-normalised values, ...) are
declared with their ``derive`` formula next to their entry in
:data:`pkwidgets.parameters.PARAMETERS`; this stage evaluates the formulas of
the codes a run returns in dependency order
(:func:`pkwidgets.parameters.derivation_order`), vectorised over profiles.
Division by zero and overflow give inf or NaN here; the flags stage turns
inf into NaN with the flag ``nonfinite_result``.
"""

from __future__ import annotations

import numpy as np

from .parameters import PARAMETERS, derivation_order

__all__ = ["derive_parameters"]

_ORDER = derivation_order()


def derive_parameters(measured: dict, inputs: dict, codes) -> dict:
    """Measured values plus the derived ones among ``codes``.

    Parameters
    ----------
    measured : dict of str to ndarray
        Values by code from the earlier stages (CMAX, AUCLST, LAMZ, ...).
    inputs : dict of str to ndarray
        Per-profile inputs named in :data:`pkwidgets.parameters.DERIVE_INPUTS`.
    codes : collection of str
        Codes the run returns; the formulas of the others are not evaluated.

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
    wanted = set(codes)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for code in _ORDER:
            if code in wanted:
                entry = PARAMETERS[code]
                values[code] = entry.derive(*[values[n] if n in PARAMETERS else inputs[n] for n in entry.inputs])
    return values
