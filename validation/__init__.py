"""Validation fixtures for scripts and tests (not shipped with the package)."""
