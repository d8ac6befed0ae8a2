"""Docstring parts shared by the entry points that take the NCA options (numpydoc text).

:func:`fill_doc` replaces ``%(name)s`` in a docstring by the part of that
name, as pandas' and matplotlib's docstring helpers do, so that the options
are described once for :func:`pkwidgets.nca_arrays` and
:func:`pkwidgets.nca_profile`.
"""

from __future__ import annotations

__all__ = ["fill_doc", "PARTS"]

PARTS = {
    "options": """options : NCAOptions, optional
        The rules of the analysis (:class:`pkwidgets.options.NCAOptions`);
        keyword arguments that differ from their defaults replace its fields
        (:func:`pkwidgets.options.build_options`).
    dose : float or array_like (profiles,), optional
        Dose amount; needed for clearance, volume and dose-normalised values.
    route : {"extravascular", "iv-bolus", "iv-infusion"}
    duration : float or array_like (profiles,), optional
        Infusion duration (required for ``"iv-infusion"``).  A number goes into
        the options; an array gives one value per profile.
    tau : float or array_like (profiles,), optional
        Dosing interval: adds AUCTAU, AUMCTAU, CMIN, CTROUGH, CAVG, FLUCP, SWING,
        CLFTAU/CLTAU and AILAMZ (per profile as ``duration``).
    auc_method : {"linear", "lin-up/log-down", "lin-log"}
    terminal : "auto", (start, end) or array_like (profiles, 2)
        Lambda-z window: the automatic search, or all usable points in
        ``[start, end]``; rows of NaN mean automatic.
    blq : array_like of bool, same shape as ``time``, optional
        True where the sample is below the LLOQ; its conc value is ignored.
    lloq : float or array_like, optional
        Lower limit of quantitation; needed by the ``"half-lloq"`` and
        ``"lloq"`` BLQ rules.
    partial : sequence of (start, end) or dict of name -> (start, end)
        Partial AUC intervals after the dose (see :func:`pkwidgets.partial_auc`);
        unnamed ones are called ``AUCINT_<start>-<end>``, names given must
        start with ``AUCINT``.
    blq_rules : BLQRules or dict, optional
        BLQ handling by position; defaults in :class:`pkwidgets.BLQRules`.
    qc : QCThresholds, optional
    lambda_z_rule : str, optional
        Automatic terminal-phase rule (:data:`pkwidgets.options.LAMBDA_Z_RULES`);
        default ``"tail-extension"``, this project's rule.
    first_dose : array_like of bool (profiles,), optional
        With ``tau``: True where the interval follows the first dose, so nothing
        was given before it; without a sample at dose time its concentration
        there is 0 (extravascular or infusion, flag ``time0_added``) instead of
        CMIN of the interval.  :func:`pkwidgets.nca` sets it from ``occasion``.""",
}


def fill_doc(func):
    """Replace ``%(name)s`` in ``func.__doc__`` by :data:`PARTS` ``[name]``."""
    if func.__doc__:
        func.__doc__ = func.__doc__ % PARTS
    return func
