"""``python -m scanmass`` runs the command line."""

from scanmass.cli.app import app

app(prog_name="scanmass")
