"""``python -m advisory.cli``: the same as the ``boom-advisory`` command."""

from advisory.cli import main

raise SystemExit(main())
