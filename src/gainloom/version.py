"""The release number: read by the package build (pyproject.toml) and every output that records it."""

__version__ = "0.1.0"
