"""``python -m lcao`` runs the command-line interface."""

from .cli import entry

entry()
