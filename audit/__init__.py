"""sewer-audit: screen a gravity sewer asset register for capacity, grade and data problems.

The package is a chain of plain stages, one subpackage each (see DEVELOPERS.md):
config -> layers -> network -> flows -> hydraulics -> rules -> outputs and report.

In Python: ``result = audit.run("sample_gis/town.toml")`` gives GeoDataFrames such as
``result.pipes[["flags", "load_ratio"]]``; ``audit.prepare(config)`` stops after the network.

Results are a screening aid; local codes and a licensed engineer's judgement govern.
"""

from audit.errors import AuditError, ConfigError, InputError, OutputExistsError
from audit.pipeline import Prepared, prepare, run
from audit.result import AuditResult
from audit.version import __version__

__all__ = [
    "AuditError",
    "AuditResult",
    "ConfigError",
    "InputError",
    "OutputExistsError",
    "Prepared",
    "__version__",
    "prepare",
    "run",
]
