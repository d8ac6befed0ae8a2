"""Method toggles: the AUC rule and the BLQ rules, as traits the other widgets observe."""

from __future__ import annotations

import ipywidgets as widgets
import traitlets

from ..auc import check_method
from ..blq import BLQ_RULE_VALUES, BLQRules

__all__ = ["MethodToggles", "AUC_CHOICES", "BLQ_CHOICES"]

#: (label shown, core value).  Labels are ours; values are the core's method names.
AUC_CHOICES = (
    ("linear trapezoid throughout", "linear"),
    ("linear rising, log falling", "lin-up/log-down"),
    ("linear to the peak, log after", "lin-log"),
)
BLQ_CHOICES = (("count as 0", "zero"), ("leave out", "missing"), ("use ½ LLOQ", "half-lloq"),
               ("use the LLOQ", "lloq"))


class MethodToggles(widgets.VBox):
    """AUC method and BLQ rules; ``options`` gives the keywords for the core.

    Observe ``options`` (a dict, replaced on every change) to recompute.
    """

    auc_method = traitlets.Unicode("linear", help="AUC method passed to the core as auc_method=")
    blq_before = traitlets.Unicode("zero", help="rule for BLQ samples before the first measurable one")
    blq_between = traitlets.Unicode("missing", help="rule for BLQ samples between measurable ones")
    blq_after = traitlets.Unicode("zero", help="rule for BLQ samples after the last measurable one")
    options = traitlets.Dict(help="{'auc_method': ..., 'blq_rules': {...}} for pkwidgets.nca_arrays")

    def __init__(self, *, auc_method="linear", blq_rules=None, **kwargs):
        rules = BLQRules.coerce(blq_rules)
        check_method(auc_method)
        self._auc = widgets.Dropdown(options=AUC_CHOICES, value=auc_method, description="Area rule",
                                     style={"description_width": "initial"})
        self._rules = {
            pos: widgets.Dropdown(options=BLQ_CHOICES, value=getattr(rules, pos), description=text,
                                  style={"description_width": "initial"}, layout=widgets.Layout(width="auto"))
            for pos, text in (("before", "< LLOQ before first value"), ("between", "< LLOQ in between"),
                              ("after", "< LLOQ after last value"))
        }
        super().__init__(
            [self._auc, widgets.HBox(list(self._rules.values()))], **kwargs)
        self.auc_method = auc_method
        self.blq_before, self.blq_between, self.blq_after = rules.before, rules.between, rules.after
        traitlets.link((self._auc, "value"), (self, "auc_method"))
        for pos, dd in self._rules.items():
            traitlets.link((dd, "value"), (self, f"blq_{pos}"))
        self.observe(self._changed, names=["auc_method", "blq_before", "blq_between", "blq_after"])
        self._changed(None)

    def _changed(self, _):
        self.options = method_options(self.auc_method, self.blq_before, self.blq_between, self.blq_after)


def method_options(auc_method, before, between, after):
    """Keywords for the core from the toggle values (validated)."""
    for v in (before, between, after):
        if v not in BLQ_RULE_VALUES:
            raise ValueError(f"BLQ rule must be one of {BLQ_RULE_VALUES}; got {v!r}.")
    return {"auc_method": check_method(auc_method),
            "blq_rules": {"before": before, "between": between, "after": after}}
