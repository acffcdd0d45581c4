"""The version of cyanorisk (read by the build and by every file it writes)."""

__version__ = "0.5.0"
