"""The package version: its one home (pyproject.toml reads it from here through hatchling)."""

__version__ = "0.1.0"
