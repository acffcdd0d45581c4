"""cyanorisk: bloom-risk early warning for lakes and reservoirs."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("cyanorisk")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0+unknown"
