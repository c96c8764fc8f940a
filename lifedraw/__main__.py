"""``python -m lifedraw``: the same as the ``lifedraw`` command."""
import sys

from .cli import run

sys.exit(run())
