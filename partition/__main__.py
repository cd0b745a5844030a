"""``python -m partition`` runs the crewcut command line."""
from .cli import main

raise SystemExit(main())
