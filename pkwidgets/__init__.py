"""pkwidgets: non-compartmental pharmacokinetic analysis for Jupyter.

Results support qualified review; follow local regulations and SOPs.
"""

from .blq import BLQRules
from .compare import Comparison, compare_treatments
from .engine import ArrayResult, nca_arrays
from .errors import InputDataError, UnitError
from .parameters import PARAMETERS, parameter_table, partial_code
from .profile import nca_profile, partial_auc
from .proportionality import Proportionality, dose_proportionality
from .qc import FLAGS, QCThresholds
from .record import SelectionRecord, profile_fingerprint
from .table import NCARecord, NCATable, nca
from .units import StudyUnits

__version__ = "0.1.0"

__all__ = [
    "ArrayResult",
    "BLQRules",
    "Comparison",
    "FLAGS",
    "InputDataError",
    "NCARecord",
    "NCATable",
    "PARAMETERS",
    "Proportionality",
    "QCThresholds",
    "SelectionRecord",
    "StudyUnits",
    "UnitError",
    "compare_treatments",
    "dose_proportionality",
    "nca",
    "nca_arrays",
    "nca_profile",
    "parameter_table",
    "partial_auc",
    "partial_code",
    "profile_fingerprint",
]
