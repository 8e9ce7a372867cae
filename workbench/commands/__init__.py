"""Subcommands of the ``workbench`` command; each module has ``register(subparsers)``."""
