"""Replaying a selection record onto the engine's inputs.

:func:`apply_selections` takes the latest recorded choice of each profile
and turns it into the engine's ``terminal`` and ``exclude`` arrays, but only
where the choice still fits the data:

- the fingerprint of what the fit sees (:func:`pkwidgets.profile_fingerprint`:
  times, concentrations, BLQ marks, the LLOQ of BLQ samples, the BLQ rules
  and the area method) must equal the recorded one; otherwise the profile is
  analysed automatically and marked stale;
- every excluded time must be a sampling time of the profile; an exclusion
  of a time with no sample would exclude nothing while counting as applied,
  so the whole choice is not applied: the profile is analysed automatically,
  marked stale, and a warning names the profile and the time.  (Through
  ``nca(exclude=...)`` the same is an error; a record is replayed in
  unattended runs and in the navigator, where a flag keeps the rest of the
  study usable.)
"""

from __future__ import annotations

import warnings

import numpy as np

from .fingerprint import profile_fingerprint

__all__ = ["apply_selections", "SelectionReplay"]


class SelectionReplay(tuple):
    """``(terminal, exclude, stale, applied, fingerprints)``, with the reasons as attributes.

    Unpacks as the five arrays :func:`apply_selections` always returned.

    Attributes
    ----------
    problems : dict
        ``{key tuple: text}`` for every recorded profile not applied: why
        (fingerprint differs, no fingerprint, an excluded time without a sample).
    missing_times : dict
        ``{key tuple: [times]}``: excluded times that have no sample.
    """

    def __new__(cls, terminal, exclude, stale, applied, fingerprints, problems, missing_times):
        self = super().__new__(cls, (terminal, exclude, stale, applied, fingerprints))
        self.problems = problems
        self.missing_times = missing_times
        return self

    terminal = property(lambda self: self[0])
    exclude = property(lambda self: self[1])
    stale = property(lambda self: self[2])
    applied = property(lambda self: self[3])
    fingerprints = property(lambda self: self[4])


def _lloq_rows(lloq, shape):
    """LLOQ as a (profiles, samples) array from None, a scalar, one per profile or one per sample."""
    if lloq is None:
        return np.full(shape, np.nan)
    a = np.asarray(lloq, dtype=np.float64)
    if a.ndim == 1 and a.shape[0] == shape[0]:
        a = a[:, None]
    return np.broadcast_to(a, shape)


def apply_selections(record, key_texts, time, conc, blq, exclude, terminal, *, lloq=None, blq_rules=None,
                     auc_method=None, name=None) -> SelectionReplay:
    """Apply the latest choice of each recorded profile to the engine inputs.

    Parameters
    ----------
    record : SelectionRecord
    key_texts : list of tuple of str
        Canonical key (:func:`pkwidgets.record.canonical_key`) of each profile, in row order.
    time, conc, blq, exclude : ndarray, shape (profiles, samples)
        Engine inputs (times after the dose; ``exclude`` is copied, not changed).
    terminal : "auto", (start, end) or ndarray (profiles, 2)
    lloq : float or ndarray, optional
        LLOQ as given to the engine: a scalar, one per profile (profiles,)
        or one per sample (profiles, samples).
    blq_rules : BLQRules or dict, optional
        The BLQ rules of the run (None: defaults).
    auc_method : str, optional
        The area method of the run (None: ``"linear"``).
    name : str, optional
        How warnings name the record (default: its path).

    Returns
    -------
    SelectionReplay
        Unpacks as ``terminal, exclude, stale, applied, fingerprints``:
        terminal (profiles, 2), NaN rows automatic; exclude bool (profiles,
        samples); stale bool (profiles,), recorded profiles not applied
        (fingerprint differs or missing, or an excluded time without a
        sample), set to automatic without exclusions; applied bool
        (profiles,); fingerprints, one per profile.  ``.problems`` and
        ``.missing_times`` say why.

    Warns
    -----
    UserWarning
        When a recorded exclusion names a time with no sample (profile and
        time named).
    """
    P = time.shape[0]
    term = np.full((P, 2), np.nan)
    if not (terminal is None or (isinstance(terminal, str) and terminal == "auto")):
        term[:] = np.broadcast_to(np.asarray(terminal, dtype=np.float64), (P, 2))
    excl = np.array(exclude, dtype=bool, copy=True)
    stale = np.zeros(P, dtype=bool)
    applied = np.zeros(P, dtype=bool)
    lq = _lloq_rows(lloq, time.shape)
    fps = [profile_fingerprint(time[p], conc[p], blq[p], lloq=lq[p], blq_rules=blq_rules, auc_method=auc_method)
           for p in range(P)]
    states = record.states()
    problems, missing = {}, {}
    for p, k in enumerate(key_texts):
        st = states.get(tuple(k))
        if st is None:
            continue
        term[p] = np.nan
        excl[p] = False
        hits, why, absent = _check_choice(st, fps[p], time[p])
        if why:
            stale[p] = True
            problems[tuple(k)] = why
            if absent:
                missing[tuple(k)] = absent
            continue
        applied[p] = True
        if st.window is not None:
            term[p] = st.window
        for h in hits:
            excl[p] |= h
    if missing:
        _warn_missing(missing, name or getattr(record, "path", None) or "(not saved)")
    return SelectionReplay(term, excl, stale, applied, fps, problems, missing)


def _check_choice(state, fingerprint, times):
    """(sample masks of the excluded times, why the choice cannot be applied or "", times without a sample)."""
    if state.fingerprint != fingerprint:
        return [], ("the choice has no fingerprint" if state.fingerprint is None else
                    "the fingerprint differs: the data, LLOQ, BLQ rules or area method changed"), []
    hits = [np.isclose(times, x, rtol=1e-9, atol=1e-12) for x in state.exclude]
    absent = [x for x, h in zip(state.exclude, hits) if not h.any()]
    if absent:
        return hits, f"excluded time(s) {', '.join(f'{x:g}' for x in absent)} have no sample", absent
    return hits, "", []


def _warn_missing(missing, name):
    items = list(missing.items())
    text = "; ".join(f"profile {'/'.join(k)} excludes {', '.join(f'{x:g}' for x in ts)}" for k, ts in items[:5])
    more = f" and {len(items) - 5} more" if len(items) > 5 else ""
    warnings.warn(f"selection record {name}: {text}{more}, a time with no sample. Those recorded choices were not "
                  "applied: the profiles are analysed automatically and flagged selection_stale. Record the "
                  "choice again on the data.", UserWarning, stacklevel=3)
