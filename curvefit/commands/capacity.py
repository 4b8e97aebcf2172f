"""`curvefit capacity` (being built)."""


def register(app):
    pass
