"""Defaults of the settings shared by several commands, written in one place.

Every entry point (API functions, command options, job files, the report) takes its
default from here, so ``fit`` and ``report`` give the same intervals for the same run.
"""

INTERVAL = 0.9          # level of every printed interval
BOOTSTRAP = 500         # bootstrap replicates of a curve fit
REPEATS = 5             # repeats per size when measuring
TEST_FRACTION = 0.25    # share of rows held out as the test set
SEED = 0                # random_state when none is given
