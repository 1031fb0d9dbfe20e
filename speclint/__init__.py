"""speclint: checks feedback-loop requirements kept as YAML, exactly."""

# The version lives in a plain module rather than being read back through
# importlib.metadata: that import alone costs about 45 ms, a sixth of a warm run, and a
# pre-commit hook pays it on every commit.
from speclint._version import __version__

__all__ = ["__version__"]
