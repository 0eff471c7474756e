"""Orchestration: plans and blocks, the runner, workers and progress observers."""
