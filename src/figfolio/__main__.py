"""``python -m figfolio`` is the same as the ``figfolio`` command."""
from figfolio.cli import main

raise SystemExit(main())
