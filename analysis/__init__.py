"""twofold.analysis: what it means. Tidy data, item-response and mixed models, comparisons.

Reads logs and banks through :mod:`twofold.study`; never imports :mod:`twofold.experiments`.
Heavy fits happen only when called.
"""

from twofold.study import __version__ as __version__

from ._ranks import bootstrap_ci
from .agreement import difficulty_agreement, item_difficulty, machine_error_rates
from .consistency import (
    error_consistency,
    error_consistency_distribution,
    error_consistency_kappa,
    error_consistency_summary,
)
from .data import StudyData, factor_columns, item_table, load_study_data, read_logs, scored
from .errortypes import error_type_odds, error_type_tests, error_types
from .export import export_dataset, trials_table_schema
from .irt import (
    HumanScaleResult,
    IRTResult,
    fit_irt,
    information_curve,
    item_fit,
    item_information,
    response_matrix,
    score_abilities,
    score_on_human_scale,
    simulate_responses,
)
from .mixed import (
    MixedResult,
    factor_effects,
    fit_accuracy,
    fit_glmm,
    fit_lmm,
    fit_log_time,
    item_gap_variation,
    lrt,
)
from .participants import family_accuracy, internal_consistency, profile_bayes_factors
from .planning import plan_from_pilot, plan_sample_size, required_sample_size
from .reliability import difficulty_reliability
from .robustness import robustness, robustness_test
from .run import PARTS, AnalysisRun, analyze_study

__all__ = [
    "PARTS",
    "AnalysisRun",
    "HumanScaleResult",
    "IRTResult",
    "MixedResult",
    "StudyData",
    "analyze_study",
    "bootstrap_ci",
    "difficulty_agreement",
    "difficulty_reliability",
    "error_consistency",
    "error_consistency_distribution",
    "error_consistency_kappa",
    "error_consistency_summary",
    "error_type_odds",
    "error_type_tests",
    "error_types",
    "export_dataset",
    "factor_columns",
    "factor_effects",
    "family_accuracy",
    "fit_accuracy",
    "fit_glmm",
    "fit_irt",
    "fit_lmm",
    "fit_log_time",
    "information_curve",
    "internal_consistency",
    "item_difficulty",
    "item_fit",
    "item_gap_variation",
    "item_information",
    "item_table",
    "load_study_data",
    "lrt",
    "machine_error_rates",
    "plan_from_pilot",
    "plan_sample_size",
    "profile_bayes_factors",
    "read_logs",
    "required_sample_size",
    "response_matrix",
    "robustness",
    "robustness_test",
    "score_abilities",
    "score_on_human_scale",
    "scored",
    "simulate_responses",
    "trials_table_schema",
]
