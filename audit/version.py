"""The tool's version, as installed; every output records it."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("sewer-audit")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+unknown"
