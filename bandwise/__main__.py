"""``python -m bandwise`` runs the command line."""

from .cli import main

main()
