"""Tailgauge: descriptors of a distribution over HTTP."""

__version__ = "0.1.0"
