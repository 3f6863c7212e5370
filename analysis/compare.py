"""People versus machines, one module per question (kept for imports written before the split).

The comparisons live in :mod:`~twofold.analysis.agreement` (difficulty profiles),
:mod:`~twofold.analysis.reliability` (the human split-half ceiling),
:mod:`~twofold.analysis.consistency` (error consistency), :mod:`~twofold.analysis.errortypes`
(error-type distributions) and :mod:`~twofold.analysis.robustness` (isomorphs versus parents);
the rank-correlation machinery in :mod:`twofold.analysis._ranks`. This module re-exports their
public names.
"""

from __future__ import annotations

from ._ranks import bootstrap_ci
from .agreement import AGREEMENT_COLUMNS, difficulty_agreement, item_difficulty, machine_error_rates
from .consistency import (
    CONSISTENCY_COLUMNS,
    CONSISTENCY_SUMMARY_COLUMNS,
    consistency_tables,
    error_consistency,
    error_consistency_distribution,
    error_consistency_kappa,
    error_consistency_summary,
)
from .errortypes import (
    ERROR_ODDS_COLUMNS,
    ERROR_TEST_COLUMNS,
    ERROR_TYPE_COLUMNS,
    error_type_odds,
    error_type_tests,
    error_types,
)
from .reliability import RELIABILITY_COLUMNS, difficulty_reliability
from .robustness import ROBUSTNESS_COLUMNS, robustness, robustness_test

__all__ = [
    "AGREEMENT_COLUMNS",
    "CONSISTENCY_COLUMNS",
    "CONSISTENCY_SUMMARY_COLUMNS",
    "ERROR_ODDS_COLUMNS",
    "ERROR_TEST_COLUMNS",
    "ERROR_TYPE_COLUMNS",
    "RELIABILITY_COLUMNS",
    "ROBUSTNESS_COLUMNS",
    "bootstrap_ci",
    "consistency_tables",
    "difficulty_agreement",
    "difficulty_reliability",
    "error_consistency",
    "error_consistency_distribution",
    "error_consistency_kappa",
    "error_consistency_summary",
    "error_type_odds",
    "error_type_tests",
    "error_types",
    "item_difficulty",
    "machine_error_rates",
    "robustness",
    "robustness_test",
]
