"""``python -m tco`` — the same as the ``tco`` command."""
import sys

from tco.cli import main

sys.exit(main())
