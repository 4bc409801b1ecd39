"""sewer-audit: screen a gravity sewer asset register for capacity, grade and data problems.

The package is a chain of plain stages, one subpackage each (see DEVELOPERS.md):
config -> layers -> network -> flows -> hydraulics -> rules -> outputs and report.

In Python: ``result = audit.run("sample_gis/town.toml")`` gives GeoDataFrames such as
``result.pipes[["flags", "load_ratio"]]``; ``audit.prepare(config)`` stops after the network.
The stages load when first used, so ``import audit`` (and the command line) starts quickly.

Results are a screening aid; local codes and a licensed engineer's judgement govern.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from audit.about import CAUTION, __version__
from audit.errors import AuditError, ConfigError, InputError, OutputExistsError

if TYPE_CHECKING:
    from audit.pipeline import Prepared, prepare, run
    from audit.result import AuditResult

__all__ = [
    "CAUTION",
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

_LATER = {"Prepared": "audit.pipeline", "prepare": "audit.pipeline", "run": "audit.pipeline", "AuditResult": "audit.result"}


def __getattr__(name: str) -> Any:
    """The pipeline's names, loaded on first use."""
    if name in _LATER:
        import importlib

        return getattr(importlib.import_module(_LATER[name]), name)
    raise AttributeError(f"module 'audit' has no attribute {name!r}")
