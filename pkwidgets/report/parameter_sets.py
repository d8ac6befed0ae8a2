"""The parameters a record shows, chosen by dosing regimen, in one place.

Every analysis notebook asks :func:`parameter_set` which parameters to
tabulate and summarise; the set follows the route (extravascular, IV bolus,
IV infusion) and whether a dosing interval makes it a steady-state analysis.
Codes the result does not hold are left out when the set is applied to a
table (:func:`shown_parameters`), so a code the catalogue adds later (e.g.
the 95 % limits of lambda z) appears without a change here.

At steady state the single-dose extrapolated parameters (CLFO, VZFO,
MRTEVIFO and their IV counterparts) are left out: they assume that the
profile follows one dose (common practice, no source).

Results support qualified review; follow local regulations and SOPs.
"""

from __future__ import annotations

__all__ = ["REGIMENS", "LAMBDA_Z", "CONFIDENCE", "regimen_of", "parameter_set", "shown_parameters"]

#: Lambda-z diagnostics shown in every regimen.
LAMBDA_Z = ("LAMZ", "LAMZHL", "LAMZNPT", "R2ADJ", "LAMZSPN")
#: 95 % confidence limits, shown when the result holds them (never required).
CONFIDENCE = ("LAMZ_LOWER95", "LAMZ_UPPER95", "LAMZHL_LOWER95", "LAMZHL_UPPER95", "AUCIFO_LOWER95",
              "AUCIFO_UPPER95")

#: Regimen -> parameters of its record, in table order.
REGIMENS = {
    "extravascular": ("CMAX", "TMAX", "TLAG", "CLST", "TLST", "AUCLST", "AUCIFO", "AUCPEO") + LAMBDA_Z
    + ("CLFO", "VZFO", "MRTEVIFO", "CMAXD", "AUCIFOD"),
    "iv-bolus": ("C0", "CMAX", "TMAX", "CLST", "TLST", "AUCLST", "AUCIFO", "AUCPEO", "AUCPBEO") + LAMBDA_Z
    + ("CLO", "VZO", "VSSO", "MRTIVIFO", "AUCIFOD"),
    "iv-infusion": ("CMAX", "TMAX", "CLST", "TLST", "AUCLST", "AUCIFO", "AUCPEO") + LAMBDA_Z
    + ("CLO", "VZO", "VSSO", "MRTIVIFO", "CMAXD", "AUCIFOD"),
    "steady-state extravascular": ("CMAX", "TMAX", "CMIN", "CTROUGH", "AUCTAU", "AUMCTAU", "CAVG", "FLUCP",
                                   "SWING", "CLFTAU", "VZFTAU", "AUCTAUD") + LAMBDA_Z + ("AILAMZ", "ARAUC", "ARCMAX"),
    "steady-state iv-bolus": ("C0", "CMAX", "TMAX", "CMIN", "CTROUGH", "AUCTAU", "AUMCTAU", "CAVG", "FLUCP",
                              "SWING", "CLTAU", "VZTAU", "AUCTAUD") + LAMBDA_Z + ("AILAMZ", "ARAUC", "ARCMAX"),
    "steady-state iv-infusion": ("CMAX", "TMAX", "CMIN", "CTROUGH", "AUCTAU", "AUMCTAU", "CAVG", "FLUCP",
                                 "SWING", "CLTAU", "VZTAU", "AUCTAUD") + LAMBDA_Z + ("AILAMZ", "ARAUC", "ARCMAX"),
}

_ROUTES = ("extravascular", "iv-bolus", "iv-infusion")


def regimen_of(route, *, steady_state=False) -> str:
    """The regimen name of a route, at steady state or after one dose.

    Examples
    --------
    >>> regimen_of("iv-bolus"), regimen_of("extravascular", steady_state=True)
    ('iv-bolus', 'steady-state extravascular')
    """
    if route not in _ROUTES:
        raise ValueError(f"The 'route' option must be one of {', '.join(_ROUTES)}; got {route!r}.")
    return f"steady-state {route}" if steady_state else route


def parameter_set(route, *, steady_state=False) -> list:
    """Codes a record tabulates for a regimen, then the confidence limits when present.

    Parameters
    ----------
    route : {"extravascular", "iv-bolus", "iv-infusion"}
    steady_state : bool
        True when a dosing interval (tau) is given.

    Returns
    -------
    list of str

    Examples
    --------
    >>> "CLFO" in parameter_set("extravascular"), "CLFO" in parameter_set("extravascular", steady_state=True)
    (True, False)
    >>> [c for c in parameter_set("iv-bolus") if c in ("C0", "AUCPBEO", "CLO", "VZO", "VSSO", "MRTIVIFO")]
    ['C0', 'AUCPBEO', 'CLO', 'VZO', 'VSSO', 'MRTIVIFO']
    """
    return list(REGIMENS[regimen_of(route, steady_state=steady_state)]) + list(CONFIDENCE)


def shown_parameters(result, *, route=None, steady_state=None, extra=()) -> list:
    """The codes of the regimen's set that the result holds, then its partial areas and ``extra`` codes.

    Parameters
    ----------
    result : NCAResult
        Its settings give the route and whether a dosing interval was used,
        unless ``route`` / ``steady_state`` are given.
    extra : sequence of str
        Further columns to show when present (e.g. the notebook's own).
    """
    settings = getattr(result, "settings", {}) or {}
    route = route or settings.get("route", "extravascular")
    if steady_state is None:
        steady_state = settings.get("tau") is not None
    columns = list(result.parameters.columns)
    partial = list(settings.get("partial", []) or [])
    wanted = parameter_set(route, steady_state=steady_state) + [p for p in partial if isinstance(p, str)] + list(extra)
    return [c for c in dict.fromkeys(wanted) if c in columns]
