"""Orchestration: the runner, workers, claims, reuse, progress observers, new-point evaluation and refinement."""
