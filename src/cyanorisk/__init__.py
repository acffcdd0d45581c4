"""cyanorisk: bloom-risk early warning for lakes and reservoirs."""

__version__ = "0.1.0"
