"""Study records: notebook set-up, figures, the offline HTML record, unattended runs.

One concern per module:

- :mod:`~pkwidgets.report.notebook`: the analysis notebooks' parameters into column roles and
  :func:`pkwidgets.nca` options (:func:`analysis_setup`), the data check, display defaults;
- :mod:`~pkwidgets.report.labels`: group labels for tables and legends;
- :mod:`~pkwidgets.report.figures`: static matplotlib figures (embedded as PNG);
- :mod:`~pkwidgets.report.provenance`: the run header (file SHA-256, software versions, git
  commit, settings) and the CSV/JSON exports;
- :mod:`~pkwidgets.report.html`: the HTML record from the Jinja2 template ``templates/record.html.j2``;
- :mod:`~pkwidgets.report.arguments`: notebook parameters read as YAML and checked against the notebook;
- :mod:`~pkwidgets.report.staging`: a run's output folder switched into place whole, with a manifest;
- :mod:`~pkwidgets.report.execute`: papermill execution (:func:`run_analysis`);
- :mod:`~pkwidgets.report.tables`: report tables (units in headers, significant figures, natural order);
- :mod:`~pkwidgets.report.parameter_sets`: the parameters shown, by dosing regimen;
- :mod:`~pkwidgets.report.sections`: terminal phase, concentration listing, unused rows, mean-profile data;
- :mod:`~pkwidgets.report.figure_pages`: individual profiles as small multiples captioned with λz;
- :mod:`~pkwidgets.report.words`: the first page's settings in words, counts and flags;
- :mod:`~pkwidgets.report.pdf`: the record printed to PDF by headless Chromium;
- :mod:`~pkwidgets.report.comparison_tables` and :mod:`~pkwidgets.report.design_tables`: record tables of
  treatment comparisons, dose proportionality and sampling-design evaluations.

Importing this package imports neither matplotlib, nbconvert, papermill nor
the widgets; each is imported by the function that needs it.

Results support qualified review; follow local regulations and SOPs.
"""

from .arguments import check_parameters, describe_parameters, notebook_parameters, parse_parameters, read_value
from .errors import ParameterError, RunError
from .execute import refresh_stored_outputs, run_analysis
from .figures import plot_all_profiles, plot_mean_profiles, plot_profile
from .html import find_run_info, header_html, write_record
from .labels import format_group_value, group_labels, label_groups
from .notebook import (PARAMETER_HELP, ROLES, AnalysisSetup, analysis_setup, data_check, display_defaults,
                       key_parameters)
from .provenance import CAUTION, RUN_INFO, export_results, git_commit, run_info, sha256_file, software_versions
from .staging import FAILED, MANIFEST, staged_folder, write_manifest
from .parameter_sets import REGIMENS, parameter_set, shown_parameters
from .tables import Caption, ReportTable, format_value, natural_sort, report_table, settings_table, summary_table
from .sections import (concentration_listing, left_out_table, mean_n_table, mean_profile_data, parameter_table,
                       terminal_phase_table, unused_table)
from .figure_pages import fit_caption, plot_profile_pages
from .words import flag_counts, rules_in_words, run_counts
from .pdf import write_pdf
from .comparison_tables import listing_table, proportionality_table, ratio_table, tmax_table
from .design_tables import error_table, estimable_table, flag_share_table, model_table, schedule_table
from .study_input import (DATA_FORMATS, StudyInput, input_exports, input_info, input_tables, read_study,
                          write_sdtm_outputs)

#: The record header as HTML (former private name, kept for callers of the single-module report).
_header_html = header_html

__all__ = [
    "error_table",
    "estimable_table",
    "flag_share_table",
    "model_table",
    "schedule_table",
    "listing_table",
    "proportionality_table",
    "ratio_table",
    "tmax_table",
    "DATA_FORMATS",
    "StudyInput",
    "input_exports",
    "input_info",
    "input_tables",
    "read_study",
    "write_sdtm_outputs",
    "REGIMENS",
    "Caption",
    "ReportTable",
    "concentration_listing",
    "fit_caption",
    "flag_counts",
    "format_value",
    "left_out_table",
    "mean_n_table",
    "mean_profile_data",
    "natural_sort",
    "parameter_set",
    "parameter_table",
    "plot_profile_pages",
    "report_table",
    "settings_table",
    "rules_in_words",
    "run_counts",
    "shown_parameters",
    "summary_table",
    "terminal_phase_table",
    "unused_table",
    "write_pdf",
    "CAUTION",
    "FAILED",
    "MANIFEST",
    "PARAMETER_HELP",
    "ROLES",
    "RUN_INFO",
    "AnalysisSetup",
    "ParameterError",
    "RunError",
    "analysis_setup",
    "check_parameters",
    "data_check",
    "describe_parameters",
    "display_defaults",
    "export_results",
    "find_run_info",
    "format_group_value",
    "git_commit",
    "group_labels",
    "header_html",
    "key_parameters",
    "label_groups",
    "notebook_parameters",
    "parse_parameters",
    "plot_all_profiles",
    "plot_mean_profiles",
    "plot_profile",
    "read_value",
    "refresh_stored_outputs",
    "run_analysis",
    "run_info",
    "sha256_file",
    "software_versions",
    "staged_folder",
    "write_manifest",
    "write_record",
]
