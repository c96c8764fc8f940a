"""``python -m lifedraw``: the same as the ``lifedraw`` command."""
import sys

from .cli import main

sys.exit(main())
