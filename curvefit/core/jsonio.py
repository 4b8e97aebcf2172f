"""JSON in and out: plain values, atomic writes, and reading files of older versions.

Every file curvefit writes (run files, fits, plans, capacity and trade-off results, the
report) goes through :func:`write_text_atomic`: a temporary file in the same folder,
flushed and fsynced, then renamed over the target, so a crash leaves either the old file
or the new one, never half of one. Only a new path or a regular file is written: a
directory, a symbolic link, a device, a FIFO or a socket is refused with an
:class:`InputError` (:func:`check_output_path`), and so is any OS error while writing
(disk full, no permission), with nothing half-written left. A folder of files (the
report's figures) is filled under a temporary name and renamed into place
(:func:`folder_replaced_whole`).
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import secrets
import shutil
import stat
import tempfile
from pathlib import Path
from typing import Any, Iterator

import numpy as np

from curvefit.core.errors import InputError
from curvefit.core.legacy import rename_legacy


def jsonable(obj: Any) -> Any:
    """numpy scalars and arrays, tuples and non-finite floats turned into plain JSON values
    (NaN and ±inf become None).

    Examples
    --------
    >>> jsonable({"a": np.float64(0.5), "b": (1, np.int64(2)), "c": float("nan")})
    {'a': 0.5, 'b': [1, 2], 'c': None}
    """
    if isinstance(obj, dict):
        return {str(k): jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [jsonable(v) for v in obj.tolist()]
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, np.bool_):
        return bool(obj)
    if hasattr(obj, "to_dict") and callable(obj.to_dict) and not isinstance(obj, type):
        return jsonable(obj.to_dict())
    return obj


def dumps(doc: Any, indent: int | None = 1) -> str:
    """``doc`` as JSON text (after :func:`jsonable`), ending in a newline."""
    return json.dumps(jsonable(doc), indent=indent, allow_nan=False, ensure_ascii=False) + "\n"


_KINDS = ((stat.S_ISLNK, "symbolic link"), (stat.S_ISDIR, "directory"), (stat.S_ISFIFO, "FIFO"),
          (stat.S_ISCHR, "character device"), (stat.S_ISBLK, "block device"), (stat.S_ISSOCK, "socket"))


def os_error_message(exc: OSError) -> str:
    """The reason of an OS error in a few words (``No space left on device``)."""
    return exc.strerror or str(exc) or type(exc).__name__


def check_output_path(path: str | os.PathLike, what: str = "file", *, new_folder: bool = False) -> Path:
    """``path`` if a writer may create or replace it: a new name or a regular file, in an
    existing folder; anything else is an :class:`InputError`.

    A directory, a symbolic link, a device, a FIFO or a socket is refused: the atomic
    rename would replace it with a regular file (a device node, the link rather than its
    target), and writing into it in place could block (a FIFO without a reader) or end
    up somewhere the name does not say. Links are not followed: give the real path.
    Folders higher up the path may be links. ``new_folder=True``: the caller creates a
    missing folder (an early check before long work).

    Examples
    --------
    >>> import tempfile
    >>> folder = Path(tempfile.mkdtemp())
    >>> check_output_path(folder / "run.json") == folder / "run.json"
    True
    >>> check_output_path(folder, "run file")
    Traceback (most recent call last):
    ...
    curvefit.core.errors.InputError: ... is a directory, not a file; give a file name for the run file
    """
    path = Path(path)
    try:
        mode = os.lstat(path).st_mode
    except FileNotFoundError:
        mode = None
    except OSError as exc:
        raise InputError(f"cannot write the {what} {path}: {os_error_message(exc)}") from None
    if mode is not None and not stat.S_ISREG(mode):
        kind = next((name for test, name in _KINDS if test(mode)), "special file")
        if kind == "directory":
            raise InputError(f"{path} is a directory, not a file; give a file name for the {what}")
        raise InputError(f"{path} is a {kind}, not a regular file; curvefit does not replace "
                         f"or write through it: give a regular file path for the {what}")
    if not path.parent.is_dir() and not (new_folder and not path.parent.exists()):
        raise InputError(f"folder {path.parent} does not exist; create it or choose another path")
    return path


def write_bytes_atomic(path: str | os.PathLike, data: bytes, what: str = "file") -> Path:
    """Write ``data`` to ``path`` atomically: a new temporary file beside it (never one
    that exists already), flushed and fsynced, then renamed over ``path``.

    ``path`` must pass :func:`check_output_path`. Any OS error (a full disk, no
    permission, a read-only file system) is an :class:`InputError` naming the file and
    the reason, and the temporary file is removed, so a failed write leaves the old file
    (or nothing) behind, never a half-written or empty one.
    """
    path = check_output_path(path, what)
    tmp = None
    try:
        fd, tmp = _new_temporary(path)
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise InputError(f"cannot write the {what} {path}: {os_error_message(exc)}") from None
    finally:
        if tmp is not None:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
    return path


def _new_temporary(path: Path) -> tuple[int, str]:
    """A file created new (O_EXCL, links not followed) beside ``path``; its fd and name."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0)
    for _ in range(100):
        tmp = str(path.with_name(f".{path.name}.{os.getpid()}.{secrets.token_hex(4)}.tmp"))
        try:
            return os.open(tmp, flags, 0o666), tmp
        except FileExistsError:
            continue
    raise FileExistsError(f"no free temporary name beside {path}")


def write_text_atomic(path: str | os.PathLike, text: str, what: str = "file") -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically; see :func:`write_bytes_atomic`.

    Examples
    --------
    >>> import tempfile
    >>> p = write_text_atomic(Path(tempfile.mkdtemp()) / "note.txt", "hello\\n")
    >>> p.read_text()
    'hello\\n'
    """
    return write_bytes_atomic(path, text.encode("utf-8"), what)


@contextlib.contextmanager
def folder_replaced_whole(target: str | os.PathLike, what: str = "folder") -> Iterator[Path]:
    """Fill a new folder under a temporary name; when the block ends without an error it
    takes the place of ``target`` (an old folder there is removed), otherwise it is
    removed. Readers never see a folder with only some of the new files.

    ``target`` must be a new name or a real directory (not a link or a file). An OS
    error inside the block (a full disk) becomes an :class:`InputError`.

    Examples
    --------
    >>> import tempfile
    >>> target = Path(tempfile.mkdtemp()) / "figures"
    >>> with folder_replaced_whole(target) as folder:
    ...     _ = (folder / "a.txt").write_text("a")
    >>> sorted(p.name for p in target.iterdir())
    ['a.txt']
    """
    target = Path(target)
    if target.is_symlink() or (target.exists() and not target.is_dir()):
        check_output_path(target, what)  # names the kind of special file
        raise InputError(f"{target} is a file, not a folder; remove it or choose another name "
                         f"for the {what}")
    if not target.parent.is_dir():
        raise InputError(f"folder {target.parent} does not exist; create it or choose another path")
    staging = old = None
    try:
        staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent))
        yield staging
        if target.is_dir():
            old = Path(tempfile.mkdtemp(prefix=f".{target.name}.old.", dir=target.parent))
            os.replace(target, old / target.name)
        os.replace(staging, target)
        staging = None
    except OSError as exc:
        if old is not None and not target.exists():
            with contextlib.suppress(OSError):
                os.replace(old / target.name, target)
        raise InputError(f"cannot write the {what} {target}: {os_error_message(exc)}") from None
    finally:
        for leftover in (staging, old):
            if leftover is not None:
                shutil.rmtree(leftover, ignore_errors=True)


def write_json(path: str | os.PathLike, doc: Any, what: str = "JSON file") -> Path:
    """Write ``doc`` as JSON atomically (see :func:`write_text_atomic`)."""
    return write_text_atomic(path, dumps(doc), what)


def read_json(path: str | os.PathLike, what: str = "JSON file") -> Any:
    """Read a JSON file written by curvefit, any version.

    Family names of older versions are mapped to the current ones
    (:func:`curvefit.core.legacy.rename_legacy`). A missing or broken file is an
    :class:`InputError` naming it.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{what} not found: {path}")
    try:
        with open(path, encoding="utf-8") as fh:
            return rename_legacy(json.load(fh))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{path} is not a valid {what} (not valid JSON: {exc})") from None
