"""Exports of an :class:`pkwidgets.NCAResult`: the SDTM PP domain and an Excel workbook.

Thin methods over :mod:`pkwidgets.pp` and :mod:`pkwidgets.workbook`, mixed
into the result class so that ``res.to_pp()``, ``res.write_pp(path)`` and
``res.to_excel(path)`` use the result's own keys, units and settings.
"""

from __future__ import annotations

__all__ = ["ResultExports"]


class ResultExports:
    """Export methods; the class they are mixed into provides the tables, ``by`` and ``units``."""

    def _reference_times(self):
        """Dose date-times per subject when the input came from :func:`pkwidgets.read_sdtm`."""
        cols = [c for c in ("USUBJID", "dose_datetime", "STUDYID", "PCTEST", *self.by) if c in self.samples.columns]
        if "dose_datetime" not in cols or "USUBJID" not in cols:
            return None
        used = self.samples.loc[self.samples["nca_profile_id"] >= 0, list(dict.fromkeys(cols))]
        return used.dropna(subset=["dose_datetime"]).drop_duplicates()

    def to_pp(self, studyid=None, *, specimen=None, not_computed="keep"):
        """The SDTM PP domain of this result (:func:`pkwidgets.pp.to_pp`).

        ``USUBJID`` must be one of the profile columns.  With input from
        :func:`pkwidgets.read_sdtm`, STUDYID, PPRFTDTC and the analyte name
        come from its columns.
        """
        from .pp import to_pp

        return to_pp(self.to_long(), by=list(self.by), studyid=studyid, specimen=specimen,
                     reference_times=self._reference_times(), not_computed=not_computed)

    def write_pp(self, path, studyid=None, **kwargs):
        """Write the PP domain as SAS transport (``.xpt``) or CSV, by the file's suffix (checked first)."""
        from .pp import write_pp

        return write_pp(self.to_pp(studyid, **kwargs), path)

    def to_excel(self, path, *, summaries=None):
        """An Excel workbook: parameters, summaries, flags, unused rows and settings, one sheet each."""
        from .workbook import write_workbook

        return write_workbook(path, parameters=self.parameters, summaries=summaries, flags=self.flags,
                              unused=self.unused, settings=self.settings, units=self.units)
