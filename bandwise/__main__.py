"""``python -m bandwise`` runs the command line."""

from bandwise.faces.cli import main

main()
