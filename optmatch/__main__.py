"""Allow ``python -m optmatch``."""

from optmatch.cli.main import main

raise SystemExit(main())
