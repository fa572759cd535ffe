"""``python -m partload.cli``: the ``partload`` command."""

import sys

from .main import main

sys.exit(main())
