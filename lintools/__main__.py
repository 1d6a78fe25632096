"""``python -m lintools``: the command line (see :mod:`lintools.cli`)."""

from .cli import main

raise SystemExit(main())
