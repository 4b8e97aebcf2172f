"""Model factory for examples/nightly.toml (a `file.py:make_model` spec)."""

from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler


def make_model(C=1.0):
    return make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=1000))
