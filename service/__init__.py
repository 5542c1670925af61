"""Foldwise: predict, find and explain aliases in machine spectra."""

__version__ = "0.1.0"

# Bumped whenever a change alters computed numbers, so a saved diagnosis can say what
# computed it and a reader can tell an old result from a new one.
COMPUTATION_VERSION = "2026.12.4"
