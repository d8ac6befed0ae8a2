"""pkwidgets: non-compartmental pharmacokinetic analysis for Jupyter.

Results support qualified review; follow local regulations and SOPs.
"""

from .blq import BLQRules
from .design import (DESIGN_CODES, ScheduleEvaluation, VirtualStudy, evaluate_schedule, evaluate_schedule_dask,
                     simulate_profiles)
from .design_models import CompartmentModel
from .engine import ArrayResult, nca_arrays
from .errors import InputDataError, UnitError
from .parameters import PARAMETERS, parameter_table, partial_code
from .profile import nca_profile, partial_auc
from .qc import FLAGS, QCThresholds
from .record import SelectionRecord, profile_fingerprint
from .table import NCARecord, NCATable, nca
from .units import StudyUnits

__version__ = "0.1.0"

__all__ = [
    "ArrayResult",
    "BLQRules",
    "CompartmentModel",
    "DESIGN_CODES",
    "FLAGS",
    "InputDataError",
    "NCARecord",
    "NCATable",
    "PARAMETERS",
    "QCThresholds",
    "ScheduleEvaluation",
    "SelectionRecord",
    "StudyUnits",
    "UnitError",
    "VirtualStudy",
    "evaluate_schedule",
    "evaluate_schedule_dask",
    "nca",
    "nca_arrays",
    "nca_profile",
    "parameter_table",
    "partial_auc",
    "partial_code",
    "profile_fingerprint",
    "simulate_profiles",
]
