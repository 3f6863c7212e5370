"""twofold.analysis: what it means. Tidy data, item-response and mixed models, comparisons.

Reads logs and banks through :mod:`twofold.study`; never imports :mod:`twofold.experiments`.
Heavy fits happen only when called.
"""

from .compare import (
    bootstrap_ci,
    difficulty_agreement,
    error_consistency,
    error_consistency_kappa,
    error_consistency_summary,
    error_type_odds,
    error_type_tests,
    error_types,
    item_difficulty,
    machine_error_rates,
    robustness,
    robustness_test,
)
from .data import StudyData, factor_columns, item_table, load_study_data, read_logs, scored
from .export import export_dataset, trials_table_schema
from .mixed import MixedResult, factor_effects, fit_accuracy, fit_glmm, fit_lmm, fit_log_time
from .run import PARTS, AnalysisRun, analyze_study

# item-response models and sample planning (analysis/irt.py, analysis/planning.py) add their
# public names here and to __all__.

__all__ = [
    "PARTS",
    "AnalysisRun",
    "MixedResult",
    "StudyData",
    "analyze_study",
    "bootstrap_ci",
    "difficulty_agreement",
    "error_consistency",
    "error_consistency_kappa",
    "error_consistency_summary",
    "error_type_odds",
    "error_type_tests",
    "error_types",
    "export_dataset",
    "factor_columns",
    "factor_effects",
    "fit_accuracy",
    "fit_glmm",
    "fit_lmm",
    "fit_log_time",
    "item_difficulty",
    "item_table",
    "load_study_data",
    "machine_error_rates",
    "read_logs",
    "robustness",
    "robustness_test",
    "scored",
    "trials_table_schema",
]
