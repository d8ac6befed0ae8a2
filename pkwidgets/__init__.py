"""pkwidgets: non-compartmental pharmacokinetic analysis for Jupyter.

Results support qualified review; follow local regulations and SOPs.
"""

from .blq import BLQRules
from .engine import ArrayResult, nca_arrays
from .errors import InputDataError, UnitError
from .parameters import PARAMETERS, parameter_table, partial_code
from .profile import nca_profile, partial_auc
from .qc import FLAGS, QCThresholds
from .record import SelectionRecord, profile_fingerprint
from .options import ColumnMap, NCAOptions
from .result import NCAResult, ProfileData, concat_results
from .sparse import SparseResult, nca_sparse
from .table import NCATable, nca
from .units import StudyUnits
from .urine import UrineResult, nca_urine

__version__ = "0.1.0"

__all__ = [
    "ArrayResult",
    "BLQRules",
    "FLAGS",
    "InputDataError",
    "ColumnMap",
    "NCAOptions",
    "NCAResult",
    "NCATable",
    "PARAMETERS",
    "ProfileData",
    "QCThresholds",
    "SelectionRecord",
    "SparseResult",
    "StudyUnits",
    "UnitError",
    "UrineResult",
    "concat_results",
    "nca",
    "nca_arrays",
    "nca_profile",
    "nca_sparse",
    "nca_urine",
    "parameter_table",
    "partial_auc",
    "partial_code",
    "profile_fingerprint",
]
