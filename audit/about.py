"""What every output says about the tool: its name, its version as installed, and the caution."""

from importlib.metadata import PackageNotFoundError, version

TOOL = "sewer-audit"

try:
    __version__ = version(TOOL)
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+unknown"

CAUTION = (
    "Screening aid only: these are uniform-flow and steady grade-line checks against configurable design rules, "
    "with rough estimates of remedies and costs, not a calibrated model or a design; local codes and a licensed "
    "engineer's judgement govern."
)
"""Said by every output, the README and the command line: what the results are and are not."""
