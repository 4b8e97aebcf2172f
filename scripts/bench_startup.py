"""Start-up time of the command line, side by side with a bare Python start.

Usage::

    .venv/bin/python scripts/bench_startup.py            # 7 rounds of each command
    .venv/bin/python scripts/bench_startup.py --rounds 15

Each round runs, in turn, ``python -c "import sys"`` (the floor every command pays),
``curvefit --help`` and two ``curvefit bound`` calculators as fresh processes, and
records the wall time and the CPU time (user + system) of each. It prints the medians
and the fastest wall time of each command, its ratio to the bare start, and the target:
the curvefit commands should answer within 0.5 s on this 2-core machine. The target is
judged on the median CPU time, which is what the start costs and what the wall time is
on a quiet machine; on a shared, busy machine the wall time also holds the time spent
waiting for a core (the load average is printed beside the figures). The commands
alternate round by round, so a burst of load from elsewhere slows all of them alike.

What keeps start-up short (DEVELOPERS.md, "Feedback, warnings and start-up"): the command modules and
``curvefit/__init__.py`` import numpy, pandas, scipy, scikit-learn and matplotlib only
inside the functions that use them; ``tests/test_cli.py`` checks which libraries
``--help`` and ``bound`` load, this script measures what that buys.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import time

TARGET_SECONDS = 0.5  # for --help and bound (median); issue 16

COMMANDS = {
    "python -c 'import sys'": [sys.executable, "-c", "import sys"],
    "curvefit --help": [sys.executable, "-m", "curvefit", "--help"],
    "curvefit bound samples": [sys.executable, "-m", "curvefit", "bound", "samples",
                               "--vc-dim", "10", "--eps", "0.1"],
    "curvefit bound test-error-bar": [sys.executable, "-m", "curvefit", "bound", "test-error-bar",
                                      "--n-test", "1000"],
}
BARE = "python -c 'import sys'"


def cpu_of_children() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def time_once(argv: list[str]) -> tuple[float, float]:
    """(wall seconds, CPU seconds) of one run of ``argv``."""
    cpu, started = cpu_of_children(), time.perf_counter()
    done = subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                          env=dict(os.environ, COLUMNS="100"))
    wall = time.perf_counter() - started
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(argv)} failed ({done.returncode}): {done.stderr.decode()[-500:]}")
    return wall, cpu_of_children() - cpu


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rounds", type=int, default=7, help="runs of each command (default 7)")
    args = parser.parse_args(argv)
    times: dict[str, list[tuple[float, float]]] = {name: [] for name in COMMANDS}
    for name, command in COMMANDS.items():   # warm the file cache once
        time_once(command)
    for _ in range(args.rounds):
        for name, command in COMMANDS.items():
            times[name].append(time_once(command))
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    bare_wall = statistics.median(w for w, _ in times[BARE])
    bare_cpu = statistics.median(c for _, c in times[BARE])
    print(f"start-up, {args.rounds} rounds, load average {load:.2f} on {os.cpu_count()} cores")
    print(f"{'command':<30} {'wall':>7} {'fastest':>8} {'× bare':>7} {'cpu':>7} {'× bare':>7}  "
          f"target (cpu)")
    failed = False
    for name, values in times.items():
        wall = statistics.median(w for w, _ in values)
        cpu = statistics.median(c for _, c in values)
        verdict = ""
        if name != BARE:
            ok = cpu <= TARGET_SECONDS
            failed |= not ok
            verdict = f"<= {TARGET_SECONDS:.1f} s: {'met' if ok else 'MISSED'}"
        print(f"{name:<30} {wall:>6.3f}s {min(w for w, _ in values):>7.3f}s {wall / bare_wall:>7.1f} "
              f"{cpu:>6.3f}s {cpu / bare_cpu:>7.1f}  {verdict}")
    if load > (os.cpu_count() or 1):
        print("(the machine is busier than its core count: wall times include waiting for a core)")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
