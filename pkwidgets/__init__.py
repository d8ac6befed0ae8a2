"""pkwidgets: non-compartmental pharmacokinetic analysis for Jupyter.

Results support qualified review; follow local regulations and SOPs.
"""

from .blq import BLQRules
from .engine import ArrayResult, nca_arrays
from .errors import InputDataError, UnitError
from .parameters import PARAMETERS, parameter_table, partial_code
from .pp import check_pp, to_pp, write_pp
from .profile import nca_profile, partial_auc
from .qc import FLAGS, QCThresholds
from .record import SelectionRecord, profile_fingerprint
from .sdtm import SDTMRead, read_sdtm
from .table import NCARecord, NCATable, nca
from .units import StudyUnits
from .workbook import write_workbook

__version__ = "0.1.0"

__all__ = [
    "ArrayResult",
    "BLQRules",
    "FLAGS",
    "InputDataError",
    "NCARecord",
    "NCATable",
    "PARAMETERS",
    "QCThresholds",
    "SDTMRead",
    "SelectionRecord",
    "StudyUnits",
    "UnitError",
    "check_pp",
    "nca",
    "nca_arrays",
    "nca_profile",
    "parameter_table",
    "partial_auc",
    "partial_code",
    "profile_fingerprint",
    "read_sdtm",
    "to_pp",
    "write_pp",
    "write_workbook",
]
