"""`python -m crosscheck` runs the command line, the same as the `crosscheck` script."""

from crosscheck.cli import main

raise SystemExit(main())
