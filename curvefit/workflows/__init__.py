"""Pipelines that combine the parts, callable from Python; the command line calls them.

Each module is one job a user runs end to end, and returns a result object that the
command prints: ``nightly`` (`track_run`: fit a run, record it in a history store,
compare it with its baseline; `track_job` from a job file), ``demo`` (`run_demo`: the
bundled packhouse scenario end to end), ``analysis`` (`analyse` and `report_runs`: the
fits, answers and capacities behind a report). ``jobs`` reads job files, ``packhouse``
ships the demo data. They import the parts (measuring, fitting, capacity, history,
report) and the core; no part imports them, and they import no command.
"""
