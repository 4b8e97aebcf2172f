"""Output paths: only new paths and regular files are written, atomically; a full disk
or any other OS error is one line and exit 2, with nothing half-written left behind."""

import errno
import os
import signal
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from curvefit.core.errors import InputError
from curvefit.core.jsonio import check_output_path, folder_replaced_whole, write_json, write_text_atomic
from tests.conftest import run_cli

LOGREG = "sklearn.linear_model:LogisticRegression"


@pytest.fixture(scope="module")
def iris_table(tmp_path_factory):
    from sklearn.datasets import load_iris  # data shipped in scikit-learn

    path = tmp_path_factory.mktemp("data") / "iris.csv"
    load_iris(as_frame=True).frame.to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def run_file(iris_table, tmp_path_factory):
    out = tmp_path_factory.mktemp("run") / "run.json"
    r = run_cli("measure", iris_table, "--target", "target", "--model", LOGREG, "--param", "max_iter=300",
                "--sizes", "10,20,40,80", "--repeats", "2", "--out", out, "--quiet")
    assert r.returncode == 0, r.stderr
    return out


def _special(kind: str, folder: Path) -> Path:
    """A special file of the given kind in ``folder`` (skips when the system refuses)."""
    path = folder / f"special-{kind}"
    if kind == "fifo":
        os.mkfifo(path)
    elif kind == "symlink":
        target = folder / "target.txt"
        target.write_text("keep me\n")
        path.symlink_to(target)
    elif kind == "dangling-symlink":
        path.symlink_to(folder / "nowhere.json")
    elif kind == "directory":
        path.mkdir()
    elif kind == "char-device":
        try:  # a copy of /dev/null's device number: needs root and CAP_MKNOD
            os.mknod(path, stat.S_IFCHR | 0o666, os.makedev(1, 3))
        except (PermissionError, OSError) as exc:
            pytest.skip(f"cannot create a character device here ({exc.strerror})")
    return path


def _state(path: Path):
    """What must not change: the kind of file and, for a link, where it points."""
    mode = os.lstat(path).st_mode
    return (stat.S_IFMT(mode), os.readlink(path) if stat.S_ISLNK(mode) else None)


KINDS = ["fifo", "symlink", "dangling-symlink", "directory", "char-device"]


# ------------------------------------------------------------------ the one check
@pytest.mark.parametrize("kind", KINDS)
def test_special_files_are_refused_and_left_alone(tmp_path, kind):
    path = _special(kind, tmp_path)
    before = _state(path)
    with pytest.raises(InputError, match="directory|not a regular file"):
        write_text_atomic(path, "{}\n", what="run file")
    assert _state(path) == before
    if kind == "symlink":
        assert (tmp_path / "target.txt").read_text() == "keep me\n"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")) == []


def test_dev_null_is_refused_and_stays_a_device():
    # a check only, nothing is written: /dev/null must stay a character device
    with pytest.raises(InputError, match="character device"):
        check_output_path("/dev/null", "run file")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)


def test_regular_and_new_files_are_replaced_atomically(tmp_path):
    old = tmp_path / "run.json"
    old.write_text("old\n")
    write_json(old, {"a": 1})
    assert old.read_text() == '{\n "a": 1\n}\n'
    assert write_text_atomic(tmp_path / "new.txt", "x").read_text() == "x"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["new.txt", "run.json"]
    with pytest.raises(InputError, match="does not exist"):
        write_text_atomic(tmp_path / "missing" / "x.json", "x")


# ------------------------------------------------------------------ every command
@pytest.mark.parametrize("kind", ["fifo", "symlink", "directory", "char-device"])
def test_measure_refuses_a_special_out_before_any_work(iris_table, tmp_path, kind):
    path = _special(kind, tmp_path)
    before = _state(path)
    r = run_cli("measure", iris_table, "--target", "target", "--model", LOGREG, "--sizes", "10,20",
                "--repeats", "1", "--out", path, "--quiet", timeout=120)
    lines = [line for line in r.stderr.splitlines() if line.strip()]
    assert r.returncode == 2 and len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    assert _state(path) == before
    assert not Path(str(path) + ".journal").exists()


def test_a_special_journal_path_is_refused(iris_table, tmp_path):
    out = tmp_path / "run.json"
    os.mkfifo(str(out) + ".journal")
    r = run_cli("measure", iris_table, "--target", "target", "--model", LOGREG, "--sizes", "10,20",
                "--repeats", "1", "--out", out, "--quiet", timeout=120)
    assert r.returncode == 2 and "FIFO" in r.stderr and "Traceback" not in r.stderr, r.stderr
    assert stat.S_ISFIFO(os.lstat(str(out) + ".journal").st_mode) and not out.exists()


@pytest.mark.parametrize("command, suffix", [("report", ".html"), ("fit", ".json"),
                                             ("history", ".png")])
@pytest.mark.parametrize("kind", ["fifo", "symlink"])
def test_other_writers_refuse_special_files(run_file, tmp_path, command, suffix, kind):
    path = _special(kind, tmp_path).rename(tmp_path / f"special{suffix}")
    before = _state(path)
    if command == "history":
        store = tmp_path / "h.db"
        assert run_cli("track", run_file, "--store", store, "--series", "s").returncode in (0, 1)
        args = ["history", "--store", store, "--plot", path]
    else:
        args = [command, run_file, "--out", path, "--bootstrap", "50", "--quiet"]
    r = run_cli(*args, timeout=300)
    lines = [line for line in r.stderr.splitlines() if line.strip()]
    assert r.returncode == 2 and len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    assert "not a regular file" in lines[0]
    assert _state(path) == before
    assert not (tmp_path / "special_files").exists()


# ------------------------------------------------------------------ a full disk
def _no_space(*args, **kwargs):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_injected_disk_full_leaves_old_file_and_no_temporary(tmp_path, monkeypatch):
    path = tmp_path / "fit.json"
    path.write_text("old\n")
    monkeypatch.setattr("curvefit.core.jsonio.os.fsync", _no_space)
    with pytest.raises(InputError, match="No space left on device"):
        write_json(path, {"a": 1}, what="fit file")
    assert path.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["fit.json"]


def test_injected_disk_full_leaves_no_empty_journal(tmp_path, monkeypatch):
    from curvefit.measuring.journal import Journal

    monkeypatch.setattr("curvefit.core.jsonio.os.fsync", _no_space)
    with pytest.raises(InputError, match="cannot write the journal .*No space left"):
        Journal.open(tmp_path / "run.json.journal", {"seed": 0}, resume=False)
    assert list(tmp_path.iterdir()) == []


def test_injected_disk_full_leaves_no_partial_figure_folder(run_file, tmp_path, monkeypatch):
    from curvefit.workflows.analysis import report_runs

    old = tmp_path / "report_files"
    old.mkdir()
    (old / "old.png").write_bytes(b"old")
    written = []
    write_bytes = Path.write_bytes

    def second_fails(self, data):
        if written:
            _no_space()
        written.append(self)
        return write_bytes(self, data)

    monkeypatch.setattr(Path, "write_bytes", second_fails)
    with pytest.raises(InputError, match="figure folder .*No space left"):
        report_runs([run_file], tmp_path / "report.html", bootstrap=50)
    assert len(written) == 1  # one figure was written before the disk filled up
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report_files"]
    assert [p.name for p in old.iterdir()] == ["old.png"]  # the old folder, untouched


def test_disk_full_through_the_command_line(run_file, tmp_path, monkeypatch, capsys):
    # in process, so that the injected error reaches the real entry point
    from curvefit.cli.main import main

    monkeypatch.setattr("curvefit.core.jsonio.os.fsync", _no_space)
    saved = {s: signal.getsignal(s) for s in (signal.SIGTERM, signal.SIGHUP)}
    try:
        with pytest.raises(SystemExit) as stop:
            main(["fit", str(run_file), "--bootstrap", "50", "--quiet", "--out", str(tmp_path / "fit.json")])
    finally:
        for s, handler in saved.items():
            signal.signal(s, handler)
    err = [line for line in capsys.readouterr().err.splitlines() if line.strip()]
    assert stop.value.code == 2
    target = tmp_path / "fit.json"
    assert err == [f"curvefit: error: cannot write the fit file {target}: No space left on device"]
    assert list(tmp_path.iterdir()) == []


@pytest.fixture
def small_disk(tmp_path):
    """A 1 MB tmpfs filled to the last byte (root only; skipped elsewhere)."""
    mount = tmp_path / "disk"
    mount.mkdir()
    if not sys.platform.startswith("linux") or os.geteuid() != 0:
        pytest.skip("mounting a small tmpfs needs root on Linux")
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mount)],
                       capture_output=True, text=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {r.stderr.strip()}")
    try:
        yield mount
    finally:
        subprocess.run(["umount", "-l", str(mount)], capture_output=True)


def _fill(folder: Path) -> Path:
    filler = folder / "filler"
    with open(filler, "wb", buffering=0) as fh:
        try:
            while True:
                fh.write(b"\0" * 4096)
        except OSError as exc:
            assert exc.errno == errno.ENOSPC
    return filler


@pytest.mark.slow
def test_full_tmpfs_measure_report_and_resume(iris_table, run_file, small_disk):
    filler = _fill(small_disk)
    out = small_disk / "run.json"
    measure = ["measure", iris_table, "--target", "target", "--model", LOGREG, "--param", "max_iter=300",
               "--sizes", "10,20", "--repeats", "1", "--out", out, "--quiet"]
    report = ["report", run_file, "--out", small_disk / "report.html", "--bootstrap", "50", "--quiet"]
    for args in (measure, report):
        r = run_cli(*args, timeout=300)
        lines = [line for line in r.stderr.splitlines() if line.strip()]
        assert r.returncode == 2 and len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
        assert "No space left on device" in lines[0]
        assert sorted(p.name for p in small_disk.iterdir()) == ["filler"]  # nothing half-written
    filler.unlink()
    r = run_cli(*measure, "--resume", timeout=300)
    assert r.returncode == 0, r.stderr
    assert out.is_file()


# ------------------------------------------------------------------ folders
def test_a_figure_folder_that_is_a_link_or_file_is_refused(tmp_path):
    (tmp_path / "real").mkdir()
    (tmp_path / "link").symlink_to(tmp_path / "real")
    (tmp_path / "file").write_text("x")
    for name in ("link", "file"):
        with pytest.raises(InputError):
            with folder_replaced_whole(tmp_path / name):
                pass
    assert (tmp_path / "link").is_symlink() and (tmp_path / "file").read_text() == "x"
