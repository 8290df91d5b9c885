"""``python -m tdhf``: the same command line as ``tdhf``."""

from tdhf.cli import main

raise SystemExit(main())
