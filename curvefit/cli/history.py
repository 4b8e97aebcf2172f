"""`curvefit history`: the stored runs of a history store and the trend of their figures.

Prints one table per series (run, date, model, each headline figure with its interval,
code version); ``--json`` prints the same as one JSON document; ``--plot trend.png``
draws each headline figure over the runs with its interval. Nothing is computed here:
the figures are the ones recorded by ``curvefit track``.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Optional

import pandas as pd
import typer

from curvefit.cli.common import emit_json, out, print_table
from curvefit.core.errors import InputError

_SHORT = {"test_error_at_ref": "error@ref", "decay_exponent": "decay exp.",
          "asymptote": "asymptote", "samples_for_target": "samples@target",
          "effective_capacity": "capacity"}


def _figure_names(runs: pd.DataFrame) -> list[str]:
    return [c for c in runs.columns if f"{c}_low" in runs.columns and f"{c}_high" in runs.columns]


def _cell(row, name: str) -> str:
    from curvefit.history.figures import format_interval

    est, lo, hi = row[name], row[f"{name}_low"], row[f"{name}_high"]
    return format_interval(None if pd.isna(est) else float(est),
                           None if pd.isna(lo) else float(lo), None if pd.isna(hi) else float(hi))


def _model_short(text) -> str:
    if text is None or (isinstance(text, float) and math.isnan(text)):
        return "—"
    s = str(text)
    if s.startswith("{"):
        import json

        try:
            d = json.loads(s)
            s = str(d.get("label") or d.get("spec") or d.get("name") or s)
        except ValueError:
            pass
    return s if len(s) <= 40 else "…" + s[-39:]


def history_document(store, series: str | None) -> dict:
    """The runs of ``series`` (or of all series) as a plain JSON-ready dict."""
    names = [series] if series is not None else store.series_names()
    doc = {"store": str(store.path), "schema_version": store.schema_version, "series": []}
    for name in names:
        runs = store.runs(name)
        figs = _figure_names(runs)
        entries = []
        for _, r in runs.iterrows():
            recorded = store.headline(int(r["run_id"]))
            entries.append({
                "run_id": int(r["run_id"]), "created": r["created"],
                "model": _model_value(r["model"]),
                "metric": None if pd.isna(r["metric"]) else r["metric"],
                "data_fingerprint": None if pd.isna(r["data_fingerprint"]) else r["data_fingerprint"],
                "code_version": None if pd.isna(r["code_version"]) else r["code_version"],
                "n_points": int(r["n_points"]), "n_failed": int(r["n_failed"]),
                "figures": {f: {"estimate": _none(r[f]), "low": _none(r[f"{f}_low"]),
                                "high": _none(r[f"{f}_high"]),
                                "unbounded": bool(math.isinf(r[f])),
                                "better": recorded[f].better if f in recorded else None,
                                "note": recorded[f].note if f in recorded else ""}
                            for f in figs if not pd.isna(r[f])},
            })
        doc["series"].append({"name": name, "config": store.series_config(name),
                              "runs": entries})
    return doc


def _model_value(v):
    """Model spec as stored: plain text, or the decoded JSON object."""
    if v is None or pd.isna(v):
        return None
    if str(v).startswith("{"):
        import json

        try:
            return json.loads(v)
        except ValueError:
            pass
    return str(v)


def _none(v):
    if v is None or pd.isna(v):
        return None
    f = float(v)
    return f if math.isfinite(f) else None  # unbounded values are flagged beside it


def _print_series(name: str, config: dict, runs: pd.DataFrame, entries: list) -> None:
    ref = config.get("reference_size")
    target = config.get("target_error")
    bits = [f"reference size {ref}" if ref else None,
            f"target error {target:g}" if target is not None else None]
    out.print(f"series {name}: {len(runs)} run(s)"
              + (f" ({', '.join(b for b in bits if b)})" if any(bits) else ""), markup=False)
    if runs.empty:
        return
    figs = _figure_names(runs)
    entries_by_id = {e["run_id"]: e["figures"] for e in entries}
    headers = ["run", "created", "model"] + [_SHORT.get(f, f) for f in figs] + ["code"]
    rows = []
    for _, r in runs.iterrows():
        code = r["code_version"]
        marks = {f: _ungated(f, entries_by_id.get(int(r["run_id"]), {})) for f in figs}
        rows.append([str(int(r["run_id"])), str(r["created"]).replace("T", " ")[:16],
                     _model_short(r["model"])] + [_cell(r, f) + marks[f] for f in figs]
                    + ["—" if pd.isna(code) else str(code)[:8]])
    print_table(headers, rows, align="left")
    if any("*" in c for row in rows for c in row[3:]):
        out.print("* recorded as not gated (see the note in --json)", markup=False)


def _ungated(name: str, figures: dict) -> str:
    """``*`` when a figure that normally gates was recorded as not gated."""
    from curvefit.history.figures import FIGURES

    f = figures.get(name)
    if f and FIGURES.get(name, (None,))[0] is not None and f.get("better") is None:
        return "*"
    return ""


def trend_figure(doc: dict):
    """One panel per headline figure: estimate and interval for each run, per series.

    Reads the recorded figures only. Unreachable targets (``inf``) are left out of the
    panel and named in its title.
    """
    import matplotlib.pyplot as plt
    from matplotlib.figure import Figure

    from curvefit.report import plots
    from curvefit.history.figures import FIGURES

    names = []
    for s in doc["series"]:
        for r in s["runs"]:
            names += [n for n in r["figures"] if n not in names]
    names = [n for n in FIGURES if n in names] + [n for n in names if n not in FIGURES]
    if not names:
        raise InputError("no headline figures recorded yet; nothing to plot "
                         "(record a run with: curvefit track RUN --store DB --series NAME)")
    with plt.rc_context(plots._RC):
        fig = Figure(figsize=(7.6, 2.3 * len(names) + 0.4), dpi=plots.DPI, layout="constrained")
        axes = fig.subplots(len(names), 1, sharex=True, squeeze=False)[:, 0]
        for ax, name in zip(axes, names):
            skipped = 0
            for i, s in enumerate(doc["series"]):
                xs, ys, lo, hi = [], [], [], []
                for r in s["runs"]:
                    f = r["figures"].get(name)
                    if not f or f["estimate"] is None:
                        skipped += bool(f and f.get("unbounded"))
                        continue
                    xs.append(r["run_id"])
                    ys.append(f["estimate"])
                    lo.append(f["low"] if isinstance(f["low"], float) else f["estimate"])
                    hi.append(f["high"] if isinstance(f["high"], float) else f["estimate"])
                if not xs:
                    continue
                st = plots.style(i)
                yerr = [[max(0.0, y - l) for y, l in zip(ys, lo)],
                        [max(0.0, h - y) for y, h in zip(ys, hi)]]
                ax.errorbar(xs, ys, yerr=yerr, color=st["color"], marker=st["marker"],
                            linestyle=st["linestyle"], linewidth=1.2, markersize=4.5,
                            capsize=3, elinewidth=0.9, label=s["name"])
            direction, label = FIGURES.get(name, (None, name))
            hint = {"lower": " — lower is better", "higher": " — higher is better"}.get(direction, "")
            extra = f" ({skipped} unreachable not drawn)" if skipped else ""
            ax.set_title(f"{label}{hint}{extra}", fontsize=9.5)
            if len(doc["series"]) > 1:
                ax.legend(loc="best")
        axes[-1].set_xlabel("run id (in order of recording)")
        axes[-1].xaxis.get_major_locator().set_params(integer=True)
    return fig


def register(app: typer.Typer) -> None:
    @app.command("history")
    def history(
        store_path: str = typer.Option(..., "--store", help="History store file (e.g. history.db)."),
        series: Optional[str] = typer.Option(None, "--series", help="Only this series."),
        json_out: bool = typer.Option(False, "--json", help="Print the runs as JSON on stdout."),
        plot: Optional[Path] = typer.Option(None, "--plot",
                                            help="Write a trend figure (PNG, or SVG by suffix)."),
        quiet: bool = typer.Option(False, "--quiet", help="No progress messages."),
    ):
        """List the stored runs and the trend of their headline figures."""
        from curvefit.history.store import Store

        with Store(store_path, create=False) as store:
            doc = history_document(store, series)
            frames = {name: store.runs(name) for name in ([series] if series else store.series_names())}
        if plot is not None:
            from curvefit.report import plots

            fmt = plot.suffix.lower().lstrip(".") or "png"
            if fmt not in ("png", "svg"):
                raise InputError(f"--plot {plot}: use a .png or .svg file name")
            if not plot.parent.is_dir():
                raise InputError(f"--plot {plot}: directory {plot.parent} does not exist")
            plot.write_bytes(plots.figure_bytes(trend_figure(doc), fmt))
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

