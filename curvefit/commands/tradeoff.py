"""`curvefit tradeoff` (being built)."""


def register(app):
    pass
