"""The command line: a thin typer layer over the library."""
