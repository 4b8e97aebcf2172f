"""Command-line subcommands: one module per command, each with ``register(app)``.

Modules here parse options, call the API and print; they compute nothing themselves.
"""

COMMANDS = ["measure", "fit", "need", "capacity", "bound", "tradeoff", "report",
            "track", "history", "demo"]
