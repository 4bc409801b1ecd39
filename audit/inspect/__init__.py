"""``sewer-audit inspect``: the first thing a new user runs; not a pipeline stage.

In: a vector file, or a folder of them. Out: a description of its layers (roles, fields, units,
codes, nulls and sentinels, how many pipe ends name a manhole) and a starter config whose every
guess says why and asks to be checked. It reads the register as the layers stage would and
writes only the config file, never over an existing one (docs/inspect.md).

Modules, in the order they work: ``listing`` (layers and fields), ``profiling`` (the columns
the name rules want, through Arrow), ``matching`` (node fields by match rate), ``guessing``
(fields, units, sentinels), ``codes`` (shape and kind codes by word rules), ``starter`` (the
config text), ``inspection`` (the command).
"""

from audit.inspect.inspection import inspect_command, inspect_layers, inspect_path

__all__ = ["inspect_command", "inspect_layers", "inspect_path"]
