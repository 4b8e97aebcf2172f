"""`curvefit history`: the stored runs of a history store and the trend of their figures.

Prints one table per series (run, date, model, each headline figure with its interval,
code version); ``--json`` prints the same as one JSON document; ``--plot trend.png``
draws each headline figure over the runs with its interval. Nothing is computed here:
the figures are the ones recorded by ``curvefit track``.
"""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from curvefit.cli.common import emit_json, out, print_table
from curvefit.core.errors import InputError
from curvefit.core.formatting import format_error

_SHORT = {"test_error_at_ref": "error@ref", "decay_exponent": "decay exp.",
          "asymptote": "asymptote", "samples_for_target": "samples@target",
          "effective_capacity": "capacity", "efficiency_ratio": "labels ×",
          "error_area": "error Δ"}


def _cell(row, name: str) -> str:
    import pandas as pd

    from curvefit.core.formatting import MISSING
    from curvefit.history.figures import format_figure, make_figure

    if pd.isna(row[name]):
        return MISSING
    metric = "error" if pd.isna(row["metric"]) else str(row["metric"])
    return format_figure(make_figure(name, row[name], row[f"{name}_low"], row[f"{name}_high"]),
                         metric)


MODEL_WIDTH = 48


def _model_short(value) -> str:
    """The model with its parameters, cut at `MODEL_WIDTH` characters (the fingerprint
    column tells models apart whatever is cut)."""
    from curvefit.history.listing import model_label

    s = model_label(value)
    if s is None:
        return "—"
    return s if len(s) <= MODEL_WIDTH else s[:MODEL_WIDTH - 1] + "…"


def _ungated(name: str, figures: dict) -> str:
    """``*`` when a figure that normally gates was recorded as not gated."""
    from curvefit.history.figures import FIGURES

    f = figures.get(name)
    if f and FIGURES.get(name, (None,))[0] is not None and f.get("better") is None:
        return "*"
    return ""


def _print_series(name: str, config: dict, runs, entries: list) -> None:
    import pandas as pd

    from curvefit.history.figures import one_line
    from curvefit.history.listing import figure_names, model_fingerprint

    ref = config.get("reference_size")
    target = config.get("target_error")
    bits = [f"reference size {ref}" if ref else None,
            f"target error {format_error(target)}" if target is not None else None]
    out.print(f"series {one_line(name)}: {len(runs)} run(s)"
              + (f" ({', '.join(b for b in bits if b)})" if any(bits) else ""), markup=False)
    if runs.empty:
        return
    figs = figure_names(runs)
    entries_by_id = {e["run_id"]: e["figures"] for e in entries}
    headers = ["run", "created", "model", "model id"] + [_SHORT.get(f, f) for f in figs] + ["code"]
    rows = []
    for _, r in runs.iterrows():
        code = r["code_version"]
        marks = {f: _ungated(f, entries_by_id.get(int(r["run_id"]), {})) for f in figs}
        rows.append([str(int(r["run_id"])), str(r["created"]).replace("T", " ")[:16],
                     _model_short(r["model"]), model_fingerprint(r["model"]) or "—"]
                    + [_cell(r, f) + marks[f] for f in figs]
                    + ["—" if pd.isna(code) else str(code)[:8]])
    print_table(headers, rows, align="left")
    if any("*" in c for row in rows for c in row[4:]):
        out.print("* recorded as not gated (see the note in --json)", markup=False)


def _write_plot(doc: dict, plot: Path) -> None:
    from curvefit.report import plots

    fmt = plot.suffix.lower().lstrip(".") or "png"
    if fmt not in ("png", "svg"):
        raise InputError(f"--plot {plot}: use a .png or .svg file name")
    if not plot.parent.is_dir():
        raise InputError(f"--plot {plot}: directory {plot.parent} does not exist")
    from curvefit.core.jsonio import check_output_path, write_bytes_atomic
    from curvefit.history.listing import trend_document

    check_output_path(plot, "trend figure")  # a device, FIFO, link or folder is refused
    # one panel per kind of value: never a line joining two families or two baselines
    figure = plots.figure_bytes(plots.trend_figure(trend_document(doc)), fmt)
    write_bytes_atomic(plot, figure, what="trend figure")


def register(app: typer.Typer) -> None:
    @app.command("history")
    def history(
        store_path: str = typer.Option(..., "--store", help="History store: a file (history.db) or "
                                       "postgresql://user@host/db."),
        series: Optional[str] = typer.Option(None, "--series", help="Only this series."),
        json_out: bool = typer.Option(False, "--json", help="Print the runs as JSON on stdout."),
        plot: Optional[Path] = typer.Option(None, "--plot",
                                            help="Write a trend figure (PNG, or SVG by suffix)."),
        quiet: bool = typer.Option(False, "--quiet", help="No progress messages."),
    ):
        """List the stored runs and the trend of their headline figures."""
        from curvefit.history.listing import history_document
        from curvefit.history.store import Store

        with Store(store_path, create=False) as store:
            doc = history_document(store, series)
            frames = {s["name"]: store.runs(s["name"]) for s in doc["series"]}
        if plot is not None:
            _write_plot(doc, plot)
        if json_out:
            if plot is not None:
                doc["plot"] = str(plot)
            emit_json(doc)
            return
        if not doc["series"]:
            out.print(f"{store_path}: no runs recorded yet", markup=False)
        for i, s in enumerate(doc["series"]):
            if i:
                out.print("", markup=False)
            _print_series(s["name"], s["config"] or {}, frames[s["name"]], s["runs"])
        if plot is not None:
            out.print(f"trend figure: {plot}", markup=False)
