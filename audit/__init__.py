"""sewer-audit: screen a gravity sewer asset register for capacity, grade and data problems.

The package is a chain of plain stages (see DEVELOPERS.md):
config -> layers -> network -> design flows -> hydraulics -> rules -> outputs.

In Python: ``result = audit.run("sample_gis/town.toml")`` gives GeoDataFrames such as
``result.pipes[["flags", "load_ratio"]]``; ``audit.prepare(config)`` stops after the network.

Results are a screening aid; local codes and a licensed engineer's judgement govern.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("sewer-audit")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+unknown"

from .pipeline import prepare, run  # noqa: E402  (the version is needed by later imports)

__all__ = ["__version__", "prepare", "run"]
