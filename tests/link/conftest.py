"""Fixtures for the link tests live in link_fixtures.py (a unique module name, so test folders do not clash)."""

from link_fixtures import *  # noqa: F401,F403
