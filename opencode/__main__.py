"""`python -m opencode` runs the `oecode` command."""

from opencode.cli import main

raise SystemExit(main())
