"""Versions of the solver libraries, reported with every answer and part of cache keys."""

import ortools

ORTOOLS_VERSION = ortools.__version__
