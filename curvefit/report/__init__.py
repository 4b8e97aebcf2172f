"""Presentation: figures and the self-contained HTML report. Reads results; computes none.

``plots`` (matplotlib figures), ``html`` (the report page).
"""
