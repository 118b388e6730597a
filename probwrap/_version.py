"""The package version (one place; ``pyproject.toml`` holds the same number)."""

__version__ = "0.1.0"
