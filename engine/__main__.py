"""Entry point for ``python -m engine``."""

import sys

try:
    from engine.cli import main
except ImportError as exc:  # a dependency missing: one line, not a traceback
    sys.stderr.write(f"error: quietgrade cannot start: {exc}; install its requirements\n")
    sys.exit(2)

sys.exit(main())
