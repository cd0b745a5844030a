"""``python -m crewcut`` runs the crewcut command line."""
from crewcut.cli.main import main

raise SystemExit(main())
