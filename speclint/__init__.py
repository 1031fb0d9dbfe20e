"""speclint: checks feedback-loop requirements kept as YAML, exactly."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("speclint")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+source"
