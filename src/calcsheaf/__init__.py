"""calcsheaf: verified dynamics calculation packages from plain-text calc files."""

__version__ = "0.1.0"
