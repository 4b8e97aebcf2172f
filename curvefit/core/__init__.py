"""The shared core every part uses, and which uses no other part.

``errors`` (the exceptions raised on purpose), ``estimate`` (``Estimate``, the one
interval type), ``curve`` (``Curve``, the measured points and their metadata),
``validate`` (checks of levels, counts, seeds, choices), ``formatting`` (how numbers
read in the terminal, the report and JSON labels), ``stats`` (standard errors, t and
exact binomial intervals), ``jsonio`` (plain JSON values, atomic writes, reading files
of older versions), ``legacy`` (names used by older files) and ``defaults`` (one default
per shared setting).
"""
