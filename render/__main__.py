"""``python -m render`` runs the lampcast command line."""

from render.cli import main

raise SystemExit(main())
