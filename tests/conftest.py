"""Shared fixtures (defined in scenario_runs.py, a unique module name)."""

from scenario_runs import scenario_run  # noqa: F401
