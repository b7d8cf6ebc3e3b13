"""breathfleet: statistical quality control for fleets of evidential breath alcohol instruments."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("breathfleet")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+source"
