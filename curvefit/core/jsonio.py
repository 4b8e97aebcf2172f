"""JSON in and out: plain values, atomic writes, and reading files of older versions.

Every file curvefit writes (run files, fits, plans, capacity and trade-off results, the
report) goes through :func:`write_text_atomic`: a temporary file in the same folder,
flushed and fsynced, then renamed over the target, so a crash leaves either the old file
or the new one, never half of one. A target that is not a regular file (a device, a FIFO,
a symbolic link) is written in place instead of being replaced by the rename.
"""

from __future__ import annotations

import json
import math
import os
import stat
from pathlib import Path
from typing import Any

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


def _is_special(path: Path) -> bool:
    try:
        mode = os.lstat(path).st_mode
    except FileNotFoundError:
        return False
    return not stat.S_ISREG(mode)


def write_text_atomic(path: str | os.PathLike, text: str, what: str = "file") -> Path:
    """Write ``text`` to ``path`` atomically (temporary file, fsync, rename).

    A directory or missing folder is an :class:`InputError`; so is any OS error (a full
    disk, no permission), with the temporary file removed. A special file (device, FIFO,
    symbolic link) is opened and written, never replaced.
    """
    path = Path(path)
    if path.is_dir():
        raise InputError(f"{path} is a directory; give a file name for the {what}")
    if not path.parent.exists():
        raise InputError(f"folder {path.parent} does not exist; create it or choose another path")
    data = text.encode("utf-8")
    if _is_special(path):
        try:
            with open(path, "wb") as fh:
                fh.write(data)
        except OSError as exc:
            raise InputError(f"cannot write {what} {path}: {exc.strerror or exc}") from None
        return path
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        try:
            tmp.unlink()
        except OSError:
            pass
        raise InputError(f"cannot write {what} {path}: {exc.strerror or exc}") from None
    return path


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
