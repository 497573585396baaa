"""``python -m scanmass`` runs the command line."""

from .cli import app

app(prog_name="scanmass")
