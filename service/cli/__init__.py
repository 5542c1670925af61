"""The ``foldwise`` command: a thin adapter over the use-cases."""

from .main import build_parser, main

__all__ = ["build_parser", "main"]
