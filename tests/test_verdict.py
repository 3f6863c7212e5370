"""The verdict's wording rules: every branch, and the table built from analysis outputs."""

from __future__ import annotations

import math

import pandas as pd
import pytest
from twofold.analysis.verdict import (
    ANSWERS,
    QUESTIONS,
    VERDICT_COLUMNS,
    build_verdict,
    error_type_answer,
    verdict_answer,
)


@pytest.mark.parametrize(
    ("lo", "hi", "kw", "expected"),
    [
        (math.nan, 0.5, {"like_low": 0.4}, "undefined"),
        (0.1, 0.5, {"like_low": math.nan}, "undefined"),
        (0.45, 0.7, {"like_low": 0.4, "null": 0.0}, "yes"),
        (0.05, 0.3, {"like_low": 0.4, "null": 0.0}, "partly"),
        (-0.1, 0.3, {"like_low": 0.4, "null": 0.0}, "no"),
        (-0.1, 0.3, {"like_low": 0.4}, "no"),
        (0.2, 0.6, {"like_low": 0.4, "null": 0.0}, "cannot tell"),
        (-0.05, 0.05, {"like_low": -0.1, "like_high": 0.1}, "yes"),
        (0.12, 0.3, {"like_low": -0.1, "like_high": 0.1}, "no"),
        (-0.3, 0.05, {"like_low": -0.1, "like_high": 0.1}, "cannot tell"),
    ],
)
def test_each_rule_of_the_interval_verdict(lo, hi, kw, expected):
    assert verdict_answer(lo, hi, **kw) == expected


def test_error_type_rules_never_say_yes():
    assert error_type_answer(math.nan, 5) == "undefined"
    assert error_type_answer(0.01, 40) == "no"
    assert error_type_answer(0.6, 40) == "cannot tell"
    assert error_type_answer(0.6, 2) == "cannot tell"
    assert error_type_answer(0.04, 40, alpha=0.01) == "cannot tell"


def _tables():
    agr = pd.DataFrame(
        [
            {"group": g, "family": "all", "statistic": "spearman", "interval": "bca",
             "estimate": e, "ci_low": lo, "ci_high": hi, "n_items": 40, "conf_level": 0.95}
            for g, e, lo, hi in [("near", 0.7, 0.55, 0.85), ("far", 0.05, -0.2, 0.3),
                                 ("flat", math.nan, math.nan, math.nan)]
        ]
    )  # fmt: skip
    rel = pd.DataFrame([{"family": "all", "split_half": 0.6, "q_low": 0.45, "q_high": 0.75}])
    cs = pd.DataFrame(
        [
            {"group_a": "human", "group_b": "human", "pair_type": "human-human",
             "n_defined": 45, "mean": 0.2, "sd": 0.1},
            {"group_a": "human", "group_b": "near", "pair_type": "human-machine",
             "n_defined": 10, "mean": 0.25, "sd": 0.05},
        ]
    )  # fmt: skip
    rb = pd.DataFrame(
        [
            {"group": "human", "kind": "human", "family": "all", "difference": -0.05,
             "se": 0.01, "conf_level": 0.95},
            {"group": "near", "kind": "machine", "family": "all", "difference": -0.06,
             "se": 0.01, "conf_level": 0.95},
            {"group": "far", "kind": "machine", "family": "all", "difference": -0.4,
             "se": 0.02, "conf_level": 0.95},
        ]
    )  # fmt: skip
    ett = pd.DataFrame(
        [{"family": "strings", "group": "far", "n_group": 30, "p_val": 0.001, "cramers_v": 0.5}]
    )
    return {
        "difficulty_agreement": agr,
        "difficulty_reliability": rel,
        "consistency_summary": cs,
        "robustness": rb,
        "error_type_tests": ett,
    }


def test_build_verdict_answers_from_the_tables():
    v = build_verdict(_tables())
    assert list(v.columns) == list(VERDICT_COLUMNS)
    assert set(v["answer"]) <= set(ANSWERS) and set(v["question"]) <= set(QUESTIONS)
    got = {(r.group, r.question): r.answer for r in v.itertuples()}
    assert got[("near", "same hard items")] == "yes"
    assert got[("far", "same hard items")] == "no"
    assert got[("flat", "same hard items")] == "undefined"
    # 0.25 ± t(9) * 0.05 / sqrt(10) lies above the lower edge of people's 0.2 ± t(9) * 0.1 / 3
    assert got[("near", "same errors")] == "yes"
    assert got[("near", "same fragility")] == "yes"  # -0.01 ± 0.028, inside ±0.10
    assert got[("far", "same fragility")] == "no"
    assert got[("far", "same error types")] == "no"
    far = v[(v["group"] == "far") & (v["question"] == "same fragility")].iloc[0]
    assert far["estimate"] == pytest.approx(-0.35)
    assert "more fragile" in far["sentence"]


def test_build_verdict_without_inputs_is_empty_with_its_columns():
    v = build_verdict({})
    assert v.empty and list(v.columns) == list(VERDICT_COLUMNS)
