"""`python -m spaceframe` runs the command line."""

from spaceframe.cli import main

raise SystemExit(main())
