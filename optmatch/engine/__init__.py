"""Batched cascade engine: pure numpy, (candidates × frequencies) arrays in, responses out."""

from optmatch.engine.cascade import Response, Stage, evaluate, evaluate_reduced, worst_gamma_sq

__all__ = ["Response", "Stage", "evaluate", "evaluate_reduced", "worst_gamma_sq"]
