"""Allow ``python -m verirun``."""

from verirun.cli import main

raise SystemExit(main())
