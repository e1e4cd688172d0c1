"""Allow ``python -m workbench``."""
from workbench.cli.main import main

raise SystemExit(main())
