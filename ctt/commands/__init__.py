"""Sub-commands of the `ctt` command line.

Each module in this package defines ``register(subparsers)`` which adds one or
more sub-commands; every sub-command sets ``func`` (``args -> int`` exit code)
with ``parser.set_defaults(func=...)``. :mod:`ctt.cli` discovers the modules,
so adding a command never touches a shared file.
"""
