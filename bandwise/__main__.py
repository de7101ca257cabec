"""``python -m bandwise`` runs the command line."""

from bandwise.faces.cli import main

if __name__ == "__main__":  # not again in the worker processes a local cluster spawns
    main()
