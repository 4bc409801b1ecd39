"""``sewer-audit inspect``: describe the layers of a file and write a starter config."""

from __future__ import annotations

import argparse

from ._errors import InputError


def inspect_command(args: argparse.Namespace) -> int:
    """Not built yet."""
    raise InputError(f"{args.path}: inspect is not built yet")
