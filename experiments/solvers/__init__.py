"""Built-in solvers (reference solvers and baselines) and the solver protocol."""

from ._base import Answer, Solver, builtin_solvers, make_builtin, register_solver

__all__ = ["Answer", "Solver", "builtin_solvers", "make_builtin", "register_solver"]
