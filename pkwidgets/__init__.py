"""pkwidgets: non-compartmental pharmacokinetic analysis for Jupyter.

Results support qualified review; follow local regulations and SOPs.
"""

from .blq import BLQRules
from .combine import concat_results
from .compare import compare_treatments
from .design import ScheduleEvaluation, evaluate_schedule, evaluate_schedule_dask, simulate_profiles
from .design_models import CompartmentModel
from .engine import ArrayResult, nca_arrays
from .errors import InputDataError, UnitError
from .options import ColumnMap, NCAOptions
from .parameters import PARAMETERS, parameter_table, partial_code
from .pp import check_pp, to_pp, write_pp
from .profile import nca_profile, partial_auc
from .proportionality import dose_proportionality
from .qc import FLAGS, QCThresholds
from .record import SelectionRecord, profile_fingerprint
from .result import NCAResult, ProfileData
from .sdtm import SDTMRead, read_sdtm
from .sparse import SparseResult, nca_sparse
from .table import NCATable, nca
from .units import StudyUnits
from .urine import UrineResult, nca_urine
from .workbook import write_workbook

__version__ = "0.1.0"

__all__ = [
    "ArrayResult",
    "BLQRules",
    "ColumnMap",
    "CompartmentModel",
    "FLAGS",
    "InputDataError",
    "NCAOptions",
    "NCAResult",
    "NCATable",
    "PARAMETERS",
    "ProfileData",
    "QCThresholds",
    "SDTMRead",
    "ScheduleEvaluation",
    "SelectionRecord",
    "SparseResult",
    "StudyUnits",
    "UnitError",
    "UrineResult",
    "check_pp",
    "compare_treatments",
    "concat_results",
    "dose_proportionality",
    "evaluate_schedule",
    "evaluate_schedule_dask",
    "nca",
    "nca_arrays",
    "nca_profile",
    "nca_sparse",
    "nca_urine",
    "parameter_table",
    "partial_auc",
    "partial_code",
    "profile_fingerprint",
    "read_sdtm",
    "simulate_profiles",
    "to_pp",
    "write_pp",
    "write_workbook",
]
