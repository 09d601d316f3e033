"""Progress for long stages: a bar on a terminal, plain lines in a log.

tqdm writes carriage-return updates into logs when there is no terminal, so on a
non-terminal stream we print one plain line per message instead (DESIGN.md).
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable

__all__ = ["Reporter", "null_progress"]


def null_progress(_msg: str) -> None:
    """A progress callback that says nothing."""


class Reporter:
    """Stage-level progress reporter.

    ``reporter.stage(name, total)`` starts a stage; ``reporter(msg)`` is the per-step
    callback handed to stage functions. On a terminal a tqdm bar counts stages; elsewhere
    each message is one line with the elapsed seconds.
    """

    def __init__(self, *, stream=None, quiet: bool = False, n_stages: int | None = None) -> None:
        self.stream = stream or sys.stderr
        self.quiet = quiet
        self.t0 = time.perf_counter()
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self._bar = None
        if self.tty and not quiet and n_stages:
            from tqdm import tqdm

            self._bar = tqdm(total=n_stages, file=self.stream, unit="stage", leave=True)

    def stage(self, name: str) -> None:
        if self.quiet:
            return
        if self._bar is not None:
            self._bar.set_description(name)
            self._bar.update(1)
        else:
            self._line(f"stage: {name}")

    def __call__(self, msg: str) -> None:
        if self.quiet:
            return
        if self._bar is not None:
            self._bar.set_postfix_str(msg[:60])
        else:
            self._line(msg)

    def close(self) -> None:
        if self._bar is not None:
            self._bar.close()

    def _line(self, msg: str) -> None:
        print(f"[impactlink {time.perf_counter() - self.t0:7.1f}s] {msg}", file=self.stream, flush=True)


ProgressFn = Callable[[str], None]
