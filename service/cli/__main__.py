"""``python -m service.cli``: the same as the ``foldwise`` command."""

import sys

from .main import main

sys.exit(main())
