"""Feedback while long jobs run: the parts report events, this module shows them.

Two kinds of feedback, both on stderr and both for people (never parsed):

- `Progress`: counted work (the cells of a learning curve). Called with
  ``(done, total, item, extra=None)`` events. On a terminal it draws a bar that is
  redrawn in place and wiped at the end; elsewhere (a CI log, a pipe) it writes plain
  lines: the first once the job has run for a couple of seconds, then at most one every
  `PLAIN_EVERY` seconds, and a last line when the work is done.
- `Status`: phases of a command that take a while (reading, fitting, writing). A phase
  says nothing when it ends within `STATUS_DELAY` seconds; otherwise it shows its text
  once: a plain line on a non-terminal, a transient line on a terminal.

A part that runs many units of work takes a ``progress`` argument: ``True`` for a
`Progress` display, ``False``/``None`` for nothing, or any callable receiving
``(done, total, item)``. `progress_callback` turns that argument into one callable that
also takes ``extra``, so the part can always report an ``extra`` note.

``extra`` is what a part knows beyond the count: a string, or a mapping printed as
``key value`` pairs after the count. The mapping key ``eta`` (seconds, or None for
"unknown") replaces the estimate from the average pace; a part that knows better (it
plans its remaining work adaptively) passes it there. Example of a plain line::

    measuring: 12/60 cells, 0:30 elapsed, eta 1:30; answer so far 2,400 rows

The environment variable ``CURVEFIT_PROGRESS`` adjusts the plain lines: ``off`` shows no
feedback at all (documentation runs use it, so pasted outputs read as on a terminal,
where the bar leaves nothing behind), a number of seconds sets both the delay before the
first line and the spacing of the next (``0``: a line per event, as tests use).

Examples
--------
>>> seen = []
>>> report = progress_callback(lambda done, total, item: seen.append((done, total)))
>>> report(0, 2, None); report(1, 2, {"size": 10}, extra={"eta": 5})
>>> seen
[(0, 2), (1, 2)]
>>> progress_callback(False) is None
True
>>> Progress("measuring", "cells").line(3, 12, 30.0, extra="answer so far 2,400 rows")
'measuring: 3/12 cells, 0:30 elapsed, eta 1:30; answer so far 2,400 rows'
"""

from __future__ import annotations

import contextlib
import os
import sys
import threading
import time
from typing import Any, Callable, Mapping

from curvefit.core.errors import InputError

ProgressCallback = Callable[..., None]

# Seconds between plain progress lines in a log (common practice for CI logs: often
# enough to show the job is alive, rare enough to stay readable).
PLAIN_EVERY = 15.0
# Seconds of work before any feedback appears: shorter jobs finish before anyone waits.
FIRST_AFTER = 2.0
# Seconds a phase may take before `Status` says what it is doing.
STATUS_DELAY = 1.5
ENV = "CURVEFIT_PROGRESS"


def feedback_setting(environ: Mapping[str, str] | None = None) -> float | None:
    """Seconds between plain lines from ``CURVEFIT_PROGRESS`` (None: feedback is off).

    Examples
    --------
    >>> feedback_setting({}) == PLAIN_EVERY
    True
    >>> feedback_setting({"CURVEFIT_PROGRESS": "off"}) is None
    True
    >>> feedback_setting({"CURVEFIT_PROGRESS": "0"})
    0.0
    """
    value = (os.environ if environ is None else environ).get(ENV, "").strip().lower()
    if value in ("", "auto", "on"):
        return PLAIN_EVERY
    if value in ("off", "none", "no"):
        return None
    try:
        seconds = float(value)
    except ValueError:
        raise InputError(f"{ENV}={value!r} is not understood; use off or a number of seconds "
                         "between progress lines") from None
    if not seconds >= 0:
        raise InputError(f"{ENV} must be off or a number of seconds >= 0, got {value!r}")
    return seconds


def is_terminal(stream) -> bool:
    """True when ``stream`` is an interactive terminal (False for files, pipes, closed streams)."""
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def clock(seconds: float) -> str:
    """``m:ss`` (``h:mm:ss`` from an hour).

    Examples
    --------
    >>> clock(75), clock(3725)
    ('1:15', '1:02:05')
    """
    s = int(round(max(seconds, 0.0)))
    h, rest = divmod(s, 3600)
    m, s = divmod(rest, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m}:{s:02d}"


def extra_text(extra) -> str:
    """The printed form of an ``extra`` note (without its ``eta`` key).

    Examples
    --------
    >>> extra_text({"answer so far": "2,400 rows", "eta": 12})
    'answer so far 2,400 rows'
    >>> extra_text(None), extra_text("stopping early")
    ('', 'stopping early')
    """
    if extra is None:
        return ""
    if isinstance(extra, Mapping):
        return ", ".join(f"{k} {v}" for k, v in extra.items() if k != "eta" and v is not None)
    return str(extra)


class Progress:
    """Counted work on stderr: a bar on a terminal, plain lines in a log.

    Called with ``(done, total, item=None, extra=None)``. It starts timing at the first
    event with work left; ``done`` already reached then (resumed work) does not count
    towards the pace. Use it as a context manager so that an interrupted job also wipes
    the bar.

    Parameters
    ----------
    label : str
        What is running (``"measuring"``).
    unit : str
        What is counted (``"cells"``).
    stream : file-like, optional
        Where to write (default: ``sys.stderr`` at the time of writing).
    every : float, optional
        Seconds between plain lines (default: from ``CURVEFIT_PROGRESS``, else
        `PLAIN_EVERY`); the first plain line comes after ``min(every, FIRST_AFTER)``.
    clock_fn : callable, optional
        The time source (tests pass a fake one).

    Examples
    --------
    >>> import io
    >>> log, now = io.StringIO(), [0.0]
    >>> p = Progress("measuring", "cells", stream=log, every=10, clock_fn=lambda: now[0])
    >>> for done, t in [(0, 0), (1, 1), (2, 3), (3, 9), (4, 14), (6, 15)]:
    ...     now[0] = t; p(done, 6)
    >>> print(log.getvalue(), end="")
    measuring: 2/6 cells, 0:03 elapsed, eta 0:06
    measuring: 4/6 cells, 0:14 elapsed, eta 0:07
    measuring: 6/6 cells done in 0:15
    """

    WIDTH = 20

    def __init__(self, label: str = "working", unit: str = "items", stream=None,
                 every: float | None = None, clock_fn: Callable[[], float] = time.monotonic):
        self.label, self.unit, self._stream = label, unit, stream
        setting = feedback_setting() if every is None else every
        self.enabled = setting is not None
        self.every = PLAIN_EVERY if setting is None else float(setting)
        self._now = clock_fn
        self._start: tuple[float, int] | None = None
        self._last_line: float | None = None
        self._shown = 0

    @property
    def stream(self):
        return self._stream if self._stream is not None else sys.stderr

    def __call__(self, done: int, total: int, item: Any = None, extra=None) -> None:
        if not self.enabled:
            return
        if self._start is None:
            if not total or done >= total:
                return
            self._start = (self._now(), done)
        elapsed = self._now() - self._start[0]
        if is_terminal(self.stream):
            if done >= total:
                self.close()
                return
            self._draw("\r" + self.bar(done, total, elapsed, self._start[1], extra))
            return
        if done >= total:
            if self._last_line is not None:
                self._write(f"{self.label}: {done}/{total} {self.unit} done in {clock(elapsed)}\n")
            self._start = self._last_line = None
            return
        due = (min(self.every, FIRST_AFTER) if self._last_line is None
               else self._last_line + self.every)
        if elapsed >= due:
            self._last_line = elapsed
            self._write(self.line(done, total, elapsed, self._start[1], extra) + "\n")

    def _eta(self, done: int, total: int, elapsed: float, resumed: int, extra) -> str:
        if isinstance(extra, Mapping) and "eta" in extra:
            eta = extra["eta"]
            return f", eta {clock(eta)}" if eta is not None else ""
        fresh = done - resumed
        return f", eta {clock(elapsed / fresh * (total - done))}" if fresh > 0 else ""

    def line(self, done: int, total: int, elapsed: float, resumed: int = 0, extra=None) -> str:
        """The plain line after ``elapsed`` seconds (``resumed`` units were done before)."""
        note = extra_text(extra)
        return (f"{self.label}: {done}/{total} {self.unit}, {clock(elapsed)} elapsed"
                f"{self._eta(done, total, elapsed, resumed, extra)}" + (f"; {note}" if note else ""))

    def bar(self, done: int, total: int, elapsed: float, resumed: int = 0, extra=None) -> str:
        """The terminal bar after ``elapsed`` seconds.

        Examples
        --------
        >>> Progress("measuring", "cells").bar(3, 12, 30.0)
        'measuring [#####...............]  3/12 cells  0:30 elapsed, eta 1:30'
        """
        filled = int(self.WIDTH * done / total) if total else self.WIDTH
        shape = "#" * filled + "." * (self.WIDTH - filled)
        note = extra_text(extra)
        return (f"{self.label} [{shape}] {done:>{len(str(total))}}/{total} {self.unit}  "
                f"{clock(elapsed)} elapsed{self._eta(done, total, elapsed, resumed, extra)}"
                + (f"  {note}" if note else ""))

    def _draw(self, text: str) -> None:
        width = len(text) - 1
        self.stream.write(text.ljust(self._shown + 1))
        self.stream.flush()
        self._shown = width

    def _write(self, text: str) -> None:
        self.stream.write(text)
        self.stream.flush()

    def close(self) -> None:
        """Wipe the bar (safe to call more than once)."""
        if self._shown and is_terminal(self.stream):
            self._write("\r" + " " * self._shown + "\r")
        self._shown = 0
        self._start = None

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc) -> bool:
        self.close()
        return False


class Status:
    """What a command is doing, shown only when a phase takes a while.

    ``with status.phase("fitting 13 curve families"):`` shows nothing when the block
    ends within ``delay`` seconds; otherwise the text appears once: a plain line on a
    non-terminal (``fitting 13 curve families ...``), a line that is wiped at the end of
    the phase on a terminal.

    Parameters
    ----------
    stream : file-like, optional
        Where to write (default: ``sys.stderr`` at the time of writing).
    delay : float, optional
        Seconds before a phase speaks (default `STATUS_DELAY`; ``0`` speaks at once;
        when not given, ``CURVEFIT_PROGRESS=off`` silences it and a number below the
        default shortens it).
    enabled : bool
        False shows nothing (``--quiet``).

    Examples
    --------
    >>> import io
    >>> log = io.StringIO()
    >>> status = Status(stream=log, delay=0)
    >>> with status.phase("fitting 3 curve families"):
    ...     pass
    >>> log.getvalue()
    'fitting 3 curve families ...\\n'
    >>> with Status(stream=log, delay=60).phase("quick"):
    ...     pass
    >>> log.getvalue().count("\\n")
    1
    """

    def __init__(self, stream=None, delay: float | None = None, enabled: bool = True):
        setting = feedback_setting() if delay is None else float(delay)
        self.enabled = enabled and setting is not None
        self.delay = float(delay) if delay is not None else (
            STATUS_DELAY if setting is None else min(STATUS_DELAY, setting))
        self._stream = stream
        self._lock = threading.Lock()
        self._shown = 0

    @property
    def stream(self):
        return self._stream if self._stream is not None else sys.stderr

    def _say(self, text: str, token: list) -> None:
        with self._lock:
            if not token or token[0] != "running":
                return
            token[0] = "shown"
            if is_terminal(self.stream):
                self.stream.write("\r" + text.ljust(self._shown))
                self._shown = len(text)
            else:
                self.stream.write(text + " ...\n")
            self.stream.flush()

    @contextlib.contextmanager
    def phase(self, text: str):
        """Show ``text`` if the block is still running after ``delay`` seconds."""
        if not self.enabled:
            yield
            return
        token = ["running"]
        timer = None
        if self.delay <= 0:
            self._say(text, token)
        else:
            timer = threading.Timer(self.delay, self._say, (text, token))
            timer.daemon = True
            timer.start()
        try:
            yield
        finally:
            if timer is not None:
                timer.cancel()
            with self._lock:
                token[0] = "ended"
                if self._shown and is_terminal(self.stream):
                    self.stream.write("\r" + " " * self._shown + "\r")
                    self.stream.flush()
                self._shown = 0


def progress_callback(progress, label: str = "working", unit: str = "items") -> ProgressCallback | None:
    """The callable behind a ``progress`` argument, or None for no reporting.

    ``True`` gives a `Progress` display; ``False`` or ``None`` gives None; a callable
    taking ``(done, total, item)`` is wrapped so that it can also be called with
    ``extra=`` (which it does not receive). Anything else is an `InputError`.
    """
    if progress is None or progress is False:
        return None
    if progress is True:
        return Progress(label, unit)
    if isinstance(progress, Progress):
        return progress
    if callable(progress):
        return _Forward(progress)
    raise InputError(f"progress must be True, False or a callable taking (done, total, item), "
                     f"got {progress!r}")


class _Forward:
    """A user's ``(done, total, item)`` callable that tolerates ``extra``."""

    def __init__(self, target: Callable[[int, int, Any], None]):
        self.target = target

    def __call__(self, done: int, total: int, item: Any = None, extra=None) -> None:
        self.target(done, total, item)
