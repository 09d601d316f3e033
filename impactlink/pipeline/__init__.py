"""The pipeline runner: wires stages together, times them and publishes the run folder.

It holds no science: every number comes from a stage package. Stages run in order
(inputs -> indices -> audit -> link -> rank -> outlook -> triggers -> contrast -> report),
and a stage command runs only what it needs.

- :mod:`.state`: the typed run state (one frozen result per stage, a :class:`Run`).
- :mod:`.stages`: one function per stage, typed inputs -> typed result, no I/O.
- :mod:`.publish`: the one writer (tables, map layers, manifest.json), whole-folder publish.
- :mod:`.commands`: ``init``, ``check``, ``demo`` and ``run``.
"""

from .commands import check_project, init_project, rebuild_report, run_demo, run_project
from .state import CheckSummary, Run, RunResult

__all__ = ["run_project", "run_demo", "check_project", "init_project", "rebuild_report", "RunResult", "Run",
           "CheckSummary"]
