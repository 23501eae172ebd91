"""Progress of the stages of a plan, reported as ``(stage, done, total)``.

The planning stages (holograms, exposure of the sequence, of the mask, of
each stimulus) report through one callable, ``progress(stage, done, total)``;
``total = 0`` means the amount of work is not known in advance (the exposure
search adds disc maps until its bound is tight). :class:`TerminalProgress` is
such a callable that draws one tqdm bar per stage on stderr, and stays quiet
when stderr is not a terminal.
"""

from __future__ import annotations

import sys
import threading
from collections.abc import Callable

__all__ = ["ProgressFn", "TerminalProgress", "stage_ticker"]

#: ``progress(stage, done, total)``; ``total = 0`` when unknown.
ProgressFn = Callable[[str, int, int], None]

_UNITS = {"holograms": "step"}


class TerminalProgress:
    """One tqdm bar per stage on stderr (quiet when stderr is not a TTY)."""

    def __init__(self) -> None:
        self._bars: dict = {}
        self._lock = threading.Lock()

    def __call__(self, stage: str, done: int, total: int) -> None:
        from tqdm import tqdm

        with self._lock:
            bar = self._bars.get(stage)
            if bar is None:
                for other in self._bars.values():
                    other.close()
                bar = tqdm(
                    total=total or None,
                    desc=stage,
                    unit=_UNITS.get(stage, "disc map"),
                    file=sys.stderr,
                    leave=False,
                    disable=None,
                )
                self._bars = {stage: bar}
            bar.update(done - bar.n)
            if total and done >= total:
                bar.close()
                self._bars.pop(stage, None)

    def close(self) -> None:
        """Close any open bar."""
        with self._lock:
            for bar in self._bars.values():
                bar.close()
            self._bars = {}


def stage_ticker(progress: ProgressFn | None, stage: str) -> Callable[[], None] | None:
    """A no-argument counter that reports ``(stage, n, 0)`` on its n-th call."""
    if progress is None:
        return None
    count = [0]

    def tick() -> None:
        count[0] += 1
        progress(stage, count[0], 0)

    return tick
