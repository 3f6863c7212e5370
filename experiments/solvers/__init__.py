"""Built-in solvers (reference solvers and baselines) and the solver protocol."""

from ._base import (
    SOLVERS,
    Answer,
    BuiltinSolver,
    ItemSeeded,
    Solver,
    builtin_solvers,
    make_builtin,
    register_solver,
    trial_rng,
)

__all__ = [
    "Answer",
    "BuiltinSolver",
    "ItemSeeded",
    "SOLVERS",
    "Solver",
    "builtin_solvers",
    "make_builtin",
    "register_solver",
    "trial_rng",
]
