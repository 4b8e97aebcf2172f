"""Pipelines that combine the parts, callable from Python; the command line calls them.

Each module is one job a user runs end to end: the nightly track against a history
store, the bundled demo, the analysis of runs behind a report. They import the parts
(measuring, fitting, capacity, history, report) and the core; no part imports them.
"""
