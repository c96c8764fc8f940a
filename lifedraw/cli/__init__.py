"""The ``lifedraw`` command line: the top layer, above the engine and the dashboard."""
from .main import build_parser, main, run

__all__ = ["build_parser", "main", "run"]
