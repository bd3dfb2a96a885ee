"""Transitional: modules not yet switched import these names from here; they live in :mod:`layers.catalogue`."""

from layers.catalogue import headline_attributes, list_runs  # noqa: F401  (results.py; tests/test_provenance.py)
