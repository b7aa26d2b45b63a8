"""The ``matcher`` command line: a thin Typer layer over the library API."""
