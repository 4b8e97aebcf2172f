"""`curvefit demo` (being built)."""


def register(app):
    pass
