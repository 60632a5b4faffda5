"""``python -m exosieve``: the ``exosieve`` command."""

import sys

from .cli import main

sys.exit(main())
