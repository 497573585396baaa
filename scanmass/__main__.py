"""``python -m scanmass`` runs the command line."""

from scanmass.cli.app import run

run()
