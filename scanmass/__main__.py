"""``python -m scanmass`` runs the command line."""

from scanmass.cli.app import run

if __name__ == "__main__":  # not when a worker process started with 'spawn' imports the main module
    run()
