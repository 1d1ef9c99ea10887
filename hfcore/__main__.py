"""``python -m hfcore``: the same command as the installed ``hfcore`` script."""

from .cli import main

raise SystemExit(main())
