"""``python -m service.cli``: the ``ratecast`` command."""

from service.cli import main

raise SystemExit(main())
