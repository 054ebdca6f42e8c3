"""Sluice: network-flow optimisation over HTTP."""

__version__ = "0.1.0"
