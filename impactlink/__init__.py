"""impactlink: link drought indices to drought impacts.

Stages (each a sub-package, data flows one way):
inputs -> indices -> link -> models -> skill -> triggers -> contrast -> outlook -> report.
"""

__version__ = "0.1.0"
