"""``python -m shots`` runs the command-line interface."""

from shots.cli import main

main()
