"""The run journal: finished cells, appended one per line, safe against a crash.

The runner talks to a journal through three calls — `Journal.open`, `append`,
`close` — so the storage can change without touching the runner. This version writes
JSON lines beside the run file (``run.json.journal``):

* line 1, the header: ``{"format": "curvefit.journal/1", "run": {...}}``, where
  ``run`` identifies the run (data fingerprint, model, sizes, repeats, seed, metric,
  split). Resuming with a journal whose identity differs is refused, so cells of a
  different run are never mixed in.
* then one JSON object per finished cell, written, flushed and ``os.fsync``-ed before
  the runner reports the cell.

A crash (kill -9, power loss) can leave the last line torn; `open` drops it and
truncates the file to the last complete line. A journal with no complete header (0
bytes, or a header torn by a crash or a full disk) holds no cells, so resuming from it
starts a fresh journal. Every cell is checked before use (a size or repeat that is not
a whole number, such as text or 1e400, a number field holding text); any damage other
than a torn last line is an `InputError`.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from curvefit.core.curve import is_whole_number
from curvefit.core.errors import InputError
from curvefit.core.jsonio import jsonable, os_error_message, write_text_atomic

JOURNAL_FORMAT = "curvefit.journal/1"


def journal_path(run_path: str | os.PathLike) -> Path:
    """Where the journal of a run file lives: ``<run file>.journal``."""
    run_path = Path(run_path)
    return run_path.with_name(run_path.name + ".journal")


def journal_identity(path: str | os.PathLike) -> dict | None:
    """The run identity in a journal's header line, or None when there is no readable
    header (no journal, an empty or torn one); `Journal.open` checks the rest.

    Used before resuming to see which data fingerprint the journal was started with.
    """
    if not Path(path).is_file():  # absent, or a FIFO that would block the read
        return None
    try:
        with open(path, "rb") as fh:
            line = fh.readline(1 << 20)
        header = json.loads(line.decode("utf-8")) if line.endswith(b"\n") else None
    except (OSError, UnicodeDecodeError, ValueError, RecursionError):
        return None
    run = header.get("run") if isinstance(header, dict) else None
    return run if isinstance(run, dict) else None


def _canonical(obj: Any) -> str:
    return json.dumps(jsonable(obj), sort_keys=True, allow_nan=False)


_NUMBER_FIELDS = ("train_error", "test_error", "n_test", "n_test_errors", "fit_seconds",
                  "baseline_error")


def _check_cell(cell: dict, where: str) -> None:
    """A journaled cell as the runner uses it: whole size >= 1 and repeat >= 0, numbers or
    null in the number fields, text in the text fields."""
    fix = "; delete the journal to start over, or run without --resume"
    for key, value in cell.items():
        if isinstance(value, (dict, list)):
            raise InputError(f"{where}: the cell's {key.replace('_', ' ')} holds "
                             f"{type(value).__name__} data, not a single value{fix}")
    for key, low in (("size", 1), ("repeat", 0)):
        value = cell.get(key)
        if not is_whole_number(value) or not low <= value <= 2 ** 53:
            raise InputError(f"{where}: the cell's {key} is {value!r}, not a whole number >= {low}{fix}")
    for key in _NUMBER_FIELDS:
        value = cell.get(key)
        if value is not None and (isinstance(value, bool) or not isinstance(value, (int, float))):
            raise InputError(f"{where}: the cell's {key.replace('_', ' ')} is {value!r}, not a number{fix}")
    for key in ("status", "message"):
        if not isinstance(cell.get(key, ""), str):
            raise InputError(f"{where}: the cell's {key} is {cell[key]!r}, not text{fix}")


class Journal:
    """Append-only record of finished cells.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "run.json.journal"
    >>> j, done = Journal.open(path, {"seed": 0}, resume=False)
    >>> j.append({"size": 10, "repeat": 0, "test_error": 0.2})
    >>> j.close()
    >>> j, done = Journal.open(path, {"seed": 0}, resume=True)
    >>> [(c["size"], c["repeat"]) for c in done]
    [(10, 0)]
    >>> j.close()
    """

    def __init__(self, path: Path, fh):
        self.path = path
        self._fh = fh

    @classmethod
    def open(cls, path: str | os.PathLike, identity: dict, *, resume: bool) -> tuple["Journal", list[dict]]:
        """Open (or start) the journal at ``path`` for the run ``identity``.

        Returns the journal, ready to append, and the cells it already holds (empty
        unless ``resume``). Without ``resume`` an existing journal is replaced.
        """
        path = Path(path)
        done: list[dict] = []
        if path.exists() and not path.is_file():  # a FIFO would block the read forever
            raise InputError(f"the journal {path} exists but is not a regular file; remove it or "
                             "choose another --out")
        read = cls._read(path, identity) if resume and path.exists() else None
        if read is not None:  # None: nothing to resume (no journal, or no complete header)
            done, good_bytes = read
            fh = open(path, "r+b")
            fh.truncate(good_bytes)
            fh.seek(good_bytes)
            return cls(path, fh), done
        # the header is written atomically: a full disk leaves no empty journal behind
        header = _canonical({"format": JOURNAL_FORMAT, "run": identity}) + "\n"
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            write_text_atomic(path, header, what="journal")
            return cls(path, open(path, "ab")), done
        except OSError as exc:
            raise InputError(f"cannot write the journal {path}: {os_error_message(exc)}") from None

    @staticmethod
    def _read(path: Path, identity: dict) -> tuple[list[dict], int] | None:
        """The cells of a journal and the length of its good part; None when it has no
        complete header line (nothing was ever journaled)."""
        try:
            data = path.read_bytes()
        except OSError as exc:
            raise InputError(f"cannot read the journal {path}: {exc.strerror or exc}") from None
        lines = data.split(b"\n")
        # a complete file ends with "\n", so the last piece is empty; anything else is torn
        complete, tail = lines[:-1], lines[-1]
        records, good = [], 0
        for i, raw in enumerate(complete):
            try:
                rec = json.loads(raw.decode("utf-8"))
                if not isinstance(rec, dict):
                    raise ValueError("not an object")
            except (UnicodeDecodeError, ValueError, RecursionError):
                if i == len(complete) - 1 and not tail:
                    break  # torn last line that happened to end in a newline
                raise InputError(f"the journal {path} is corrupt at line {i + 1}; "
                                 "delete it to start over, or run without --resume") from None
            records.append(rec)
            good += len(raw) + 1
        if not records:
            return None  # 0 bytes, or only a torn header: no cell was ever recorded
        header, cells = records[0], records[1:]
        if header.get("format") != JOURNAL_FORMAT or not isinstance(header.get("run"), dict):
            raise InputError(f"{path} is not a curvefit journal (expected format "
                             f"{JOURNAL_FORMAT!r}); delete it or run without --resume")
        theirs, ours = header["run"], json.loads(_canonical(identity))
        try:
            same = _canonical(theirs) == _canonical(ours)
        except (ValueError, TypeError, RecursionError):
            same = False
        if not same:
            keys = sorted(k for k in set(theirs) | set(ours)
                          if _canonical(theirs.get(k)) != _canonical(ours.get(k)))
            raise InputError(f"the journal {path} belongs to a different run (differs in: "
                             f"{', '.join(keys)}); run without --resume to start over")
        for line, c in enumerate(cells, start=2):
            _check_cell(c, f"the journal {path}, line {line}")
        return cells, good

    def _write(self, *records: dict) -> None:
        line = "".join(_canonical(record) + "\n" for record in records).encode("utf-8")
        try:
            self._fh.write(line)
            self._fh.flush()
            os.fsync(self._fh.fileno())
        except OSError as exc:  # a torn last line is dropped by --resume
            raise InputError(f"cannot write the journal {self.path}: {os_error_message(exc)}; "
                             "the cells journaled so far are kept (--resume continues)") from None

    def append(self, cell: dict) -> None:
        """Record one finished cell durably (returns after fsync)."""
        self._write(cell)

    def append_many(self, cells: list[dict]) -> None:
        """Record cells that finished together (one task's) durably, with one fsync."""
        if cells:
            self._write(*cells)

    def close(self) -> None:
        if self._fh is not None and not self._fh.closed:
            try:
                self._fh.close()
            except OSError:  # a line a full disk refused: the write already said so
                pass

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
