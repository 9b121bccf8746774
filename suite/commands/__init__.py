"""One module per ``lyapbench`` subcommand; each exposes ``register(subparsers)``."""
