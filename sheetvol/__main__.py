"""``python -m sheetvol``: the same as the ``sheetvol`` command."""

import sys

from sheetvol.cli import main

sys.exit(main())
