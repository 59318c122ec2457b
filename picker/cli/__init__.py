"""picker's command line: thin click commands over the library."""

from picker.cli.app import cli, main

__all__ = ["cli", "main"]
