"""``python -m planner.cli``: same as the ``hiplan`` command."""
import sys

from . import main

sys.exit(main())
