"""Which register a command uses: ``--register`` or else ``VERIRUN_REGISTER`` (else none).

Kept free of database imports, so that commands which use no register start as fast as before.
"""

from __future__ import annotations

import os

#: The environment variable naming the lab's register (a file path or a database URL).
ENV = "VERIRUN_REGISTER"

_chosen: str | None = None


def use(name: str | None) -> None:
    """Use the register ``name`` (from the command line) for this process; ``None``: the default."""
    global _chosen
    _chosen = name


def named() -> str | None:
    """The register named for this process, or ``None`` when there is none."""
    name = _chosen if _chosen is not None else os.environ.get(ENV)
    return name.strip() or None if name else None
