"""Batched cascade engine: pure numpy, (candidates × frequencies) arrays in, responses out."""

from optmatch.engine.cascade import (
    Grid,
    Response,
    Stage,
    add_branch,
    branch_pair,
    evaluate,
    evaluate_reduced,
    line_terms,
    through_line,
    worst_gamma_sq,
)

__all__ = ["Grid", "Response", "Stage", "add_branch", "branch_pair", "evaluate", "evaluate_reduced", "line_terms",
           "through_line", "worst_gamma_sq"]
