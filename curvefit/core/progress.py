"""Progress of long jobs, shown as a bar on stderr; the parts report events, never draw.

A part that runs many units of work (the cells of a learning curve) takes a
``progress`` argument: ``True`` for the bar below, ``False``/``None`` for nothing, or any
callable receiving ``(done, total, item)`` events. `progress_callback` turns that argument
into one callable, so every part treats it the same way.

Examples
--------
>>> seen = []
>>> report = progress_callback(lambda done, total, item: seen.append((done, total)))
>>> report(0, 2, None); report(1, 2, {"size": 10})
>>> seen
[(0, 2), (1, 2)]
>>> progress_callback(False) is None
True
"""

from __future__ import annotations

from typing import Any, Callable

from curvefit.core.errors import InputError

ProgressCallback = Callable[[int, int, Any], None]


class ProgressBar:
    """A rich progress bar with elapsed time and ETA on stderr.

    Called with ``(done, total, item)``; it appears at the first call with work left,
    and disappears when ``done`` reaches ``total`` or on `close`. Use it as a context
    manager so that an interrupted job also removes it.

    Parameters
    ----------
    label : str
        What is running, printed before the bar (``"measuring"``).
    unit : str
        What is counted, printed after the count (``"cells"``).

    Examples
    --------
    >>> with ProgressBar("measuring", "cells") as bar:
    ...     bar(0, 0, None)      # nothing to do: no bar is drawn
    """

    def __init__(self, label: str = "working", unit: str = "items"):
        self.label, self.unit = label, unit
        self._bar = self._task = None

    def __call__(self, done: int, total: int, item: Any = None) -> None:
        if self._bar is None:
            if not total or done >= total:
                return
            self._start(total)
        self._bar.update(self._task, completed=done, total=total)
        if done >= total:
            self.close()

    def _start(self, total: int) -> None:
        from rich.console import Console
        from rich.progress import (
            BarColumn,
            MofNCompleteColumn,
            Progress,
            TextColumn,
            TimeElapsedColumn,
            TimeRemainingColumn,
        )

        self._bar = Progress(TextColumn(self.label), BarColumn(), MofNCompleteColumn(),
                             TextColumn(self.unit), TimeElapsedColumn(), TextColumn("eta"),
                             TimeRemainingColumn(), console=Console(stderr=True), transient=True)
        self._bar.start()
        self._task = self._bar.add_task(self.unit, total=total)

    def close(self) -> None:
        """Remove the bar (safe to call more than once)."""
        if self._bar is not None:
            self._bar.stop()
            self._bar = None

    def __enter__(self) -> "ProgressBar":
        return self

    def __exit__(self, *exc) -> bool:
        self.close()
        return False


def progress_callback(progress, label: str = "working", unit: str = "items") -> ProgressCallback | None:
    """The callable behind a ``progress`` argument, or None for no reporting.

    ``True`` gives a `ProgressBar`; ``False`` or ``None`` gives None; a callable is
    returned as it is. Anything else is an `InputError`.
    """
    if progress is None or progress is False:
        return None
    if progress is True:
        return ProgressBar(label, unit)
    if callable(progress):
        return progress
    raise InputError(f"progress must be True, False or a callable taking (done, total, item), "
                     f"got {progress!r}")
