"""Command line: ``workbench <sub-command> ...`` (see ``workbench --help``)."""
from workbench.cli.main import main

__all__ = ["main"]
