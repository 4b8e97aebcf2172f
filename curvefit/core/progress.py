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

import sys
import time
from typing import Any, Callable

from curvefit.core.errors import InputError

ProgressCallback = Callable[[int, int, Any], None]


class ProgressBar:
    """A one-line progress display with elapsed time and ETA on stderr (terminals only).

    Called with ``(done, total, item)``; it appears at the first call with work left, is
    redrawn in place, and is wiped when ``done`` reaches ``total`` or on `close`. On a
    stream that is not a terminal (a CI log, a pipe) it stays silent, so logs hold only
    results. Use it as a context manager so that an interrupted job also removes it.

    Parameters
    ----------
    label : str
        What is running, printed before the bar (``"measuring"``).
    unit : str
        What is counted, printed after the count (``"cells"``).
    stream : file-like, optional
        Where to draw (default: ``sys.stderr``).

    Examples
    --------
    >>> import io
    >>> with ProgressBar("measuring", "cells", stream=io.StringIO()) as bar:
    ...     bar(0, 0, None)      # nothing to do: no bar is drawn
    >>> ProgressBar("measuring", "cells").line(3, 12, 30.0)
    'measuring [#####...............]  3/12 cells  0:30 elapsed, eta 1:30'
    """

    WIDTH = 20

    def __init__(self, label: str = "working", unit: str = "items", stream=None):
        self.label, self.unit, self._stream = label, unit, stream
        self._start = None
        self._shown = 0

    @property
    def stream(self):
        return self._stream if self._stream is not None else sys.stderr

    def __call__(self, done: int, total: int, item: Any = None) -> None:
        if self._start is None:
            if not total or done >= total:
                return
            self._start = (time.monotonic(), done)
        if done >= total:
            self.close()
            return
        if not _is_terminal(self.stream):
            return
        text = self.line(done, total, time.monotonic() - self._start[0], self._start[1])
        self.stream.write("\r" + text.ljust(self._shown))
        self.stream.flush()
        self._shown = len(text)

    def line(self, done: int, total: int, elapsed: float, resumed: int = 0) -> str:
        """The text of the bar after ``elapsed`` seconds (``resumed`` units were done before)."""
        filled = int(self.WIDTH * done / total) if total else self.WIDTH
        bar = "#" * filled + "." * (self.WIDTH - filled)
        fresh = done - resumed
        eta = (f", eta {_clock(elapsed / fresh * (total - done))}" if fresh > 0 else "")
        return (f"{self.label} [{bar}] {done:>{len(str(total))}}/{total} {self.unit}  "
                f"{_clock(elapsed)} elapsed{eta}")

    def close(self) -> None:
        """Wipe the bar (safe to call more than once)."""
        if self._shown and _is_terminal(self.stream):
            self.stream.write("\r" + " " * self._shown + "\r")
            self.stream.flush()
        self._shown = 0
        self._start = None

    def __enter__(self) -> "ProgressBar":
        return self

    def __exit__(self, *exc) -> bool:
        self.close()
        return False


def _is_terminal(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def _clock(seconds: float) -> str:
    """``m:ss`` (``h:mm:ss`` from an hour)."""
    s = int(round(max(seconds, 0.0)))
    h, rest = divmod(s, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m}:{s:02d}"


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
