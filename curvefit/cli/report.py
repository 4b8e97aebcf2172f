"""`curvefit report RUN [RUN ...]`: fit each run and write the self-contained HTML report."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import List, Optional

import typer

from curvefit.cli.common import emit_json, err, out
from curvefit.core.legacy import rename_legacy
from curvefit.core.errors import InputError


def _read_json(path: Path, what: str) -> dict:
    if not path.is_file():
        raise InputError(f"{what} file not found: {path}")
    try:
        with open(path, encoding="utf-8") as fh:
            return rename_legacy(json.load(fh))
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"{path} is not a saved {what} (not valid JSON: {exc})") from None


def load_probe(path: Path):
    """A saved probe result (``curvefit capacity --probe ... --json`` output)."""
    from curvefit.capacity.vc_model import CapacityEstimate

    doc = _read_json(path, "capacity")
    if isinstance(doc, dict) and "vc_dim" not in doc and isinstance(doc.get("capacity"), dict):
        doc = doc["capacity"]  # tolerate a wrapper object around the estimate
    return CapacityEstimate.from_dict(doc)


def load_tradeoff(path: Path):
    """A saved trade-off result (``curvefit tradeoff ... --json`` output)."""
    from curvefit.capacity.tradeoff import Tradeoff

    doc = _read_json(path, "trade-off")
    if isinstance(doc, dict) and "table" not in doc and isinstance(doc.get("tradeoff"), dict):
        doc = doc["tradeoff"]
    try:
        return Tradeoff.from_dict(doc)
    except InputError:
        raise
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{path} is not a saved trade-off ({type(exc).__name__}: {exc})") from None


def unique_labels(curves, paths) -> list[str]:
    """Model labels for the runs; two runs with the same model get their file name added."""
    from curvefit.report import plots

    labels = [plots.model_label(c, i) for i, c in enumerate(curves)]
    for i, lab in enumerate(labels):
        if labels.count(lab) > 1:
            labels[i] = f"{lab} ({Path(paths[i]).stem})"
    seen: dict[str, int] = {}
    for i, lab in enumerate(labels):  # same model and same file stem: number them
        seen[lab] = seen.get(lab, 0) + 1
        if seen[lab] > 1:
            labels[i] = f"{lab} #{seen[lab]}"
    return labels


def check_target(target_error: float | None, curves) -> None:
    if target_error is None:
        return
    if not math.isfinite(target_error):
        raise InputError(f"--target-error must be a finite number, got {target_error}")
    from curvefit.report import plots

    rate = all(plots.metric_label(c.metric).endswith("(0-1)") for c in curves)
    if rate and not 0 < target_error < 1:
        raise InputError(f"--target-error is a 0-1 error rate, so it must be between 0 and 1 "
                         f"(got {target_error}); e.g. 0.05 for 5%")
    if target_error < 0:
        raise InputError(f"--target-error must not be negative, got {target_error}")


def register(app: typer.Typer) -> None:
    @app.command("report")
    def report_cmd(
        runs: List[Path] = typer.Argument(..., help="Run files (curvefit measure --out) or "
                                                    "curve tables (CSV); one per model."),
        out_path: Path = typer.Option(Path("report.html"), "--out", "-o",
                                      help="HTML file to write; figures go to <name>_files/."),
        target_error: Optional[float] = typer.Option(
            None, "--target-error", help="Test error to reach, e.g. 0.05; the report opens "
                                         "with the labelled samples needed."),
        capacity: Optional[Path] = typer.Option(
            None, "--capacity", help="Saved probe result (curvefit capacity --probe ... --json)."),
        tradeoff: Optional[Path] = typer.Option(
            None, "--tradeoff", help="Saved trade-off result (curvefit tradeoff ... --json)."),
        title: str = typer.Option("Learning-curve report", "--title", help="Report title."),
        bootstrap: int = typer.Option(200, "--bootstrap", help="Bootstrap replicates for the "
                                                               "fit intervals."),
        seed: int = typer.Option(0, "--seed", help="Seed of the bootstrap (same seed, same report)."),
        json_out: bool = typer.Option(False, "--json", help="Print a JSON summary on stdout."),
        quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress on stderr."),
    ):
        """Self-contained HTML report with figures (PNG/SVG also written)."""
        from curvefit.report import html as rep
        from curvefit.core.curve import Curve

        if bootstrap < 0:
            raise InputError(f"--bootstrap must be >= 0, got {bootstrap}")
        if out_path.suffix.lower() not in (".html", ".htm"):
            raise InputError(f"--out must name an .html file, got {out_path}")
        if not out_path.parent.exists():
            raise InputError(f"folder {out_path.parent} does not exist; create it or choose "
                             "another --out")
        curves = [Curve.read(p) for p in runs]
        check_target(target_error, curves)
        probe = load_probe(capacity) if capacity else None
        trade = load_tradeoff(tradeoff) if tradeoff else None
        if not quiet:
            err.print(f"fitting {len(curves)} run(s) ...")
        results = rep.analyse(curves, target_error=target_error, bootstrap=bootstrap,
                              random_state=seed, labels=unique_labels(curves, runs),
                              sources=[str(p) for p in runs])
        path = rep.write_report(out_path, results, target_error=target_error, probe=probe,
                                tradeoff=trade, title=title)
        figdir = rep.figure_dir_for(path)
        if json_out:
            emit_json({"report": str(path), "figures": sorted(str(p) for p in figdir.glob("*")),
                       "models": [rep.result_summary(r) for r in results]})
        else:
            out.print(str(path))
