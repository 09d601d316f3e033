"""Fixtures for the inputs tests live in inputs_fixtures.py (a unique module name, so test folders do not clash)."""

from inputs_fixtures import *  # noqa: F401,F403
