"""The project's error types.

Problems in the user's data are collected as findings (see ``audit.findings``) and never raised
one at a time. Exceptions are for input that cannot be used at all: a config file that does not
parse, a layer that does not exist, a field mapping that names no field. Every message names the
file, and where it applies the layer, key, field or feature, so the CLI can print it as it is.
"""


class AuditError(ValueError):
    """Base of every error the tool raises on purpose; the CLI prints it without a traceback."""


class ConfigError(AuditError):
    """A configuration file is unreadable, has an unknown key, or a value of the wrong type or unit."""


class InputError(AuditError):
    """An input layer cannot be used: missing file or layer, unmapped required field, no CRS."""


class OutputExistsError(AuditError):
    """The output folder already holds files and ``--overwrite`` was not given, or a target is an input."""
