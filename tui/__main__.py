"""``python -m tui`` is ``acidbase tui`` (same options)."""

import sys

from acidbase.cli import main

sys.exit(main(["tui", *sys.argv[1:]]))
