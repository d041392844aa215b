"""``python -m stepper`` runs the command line."""

from stepper.cli.main import entry

entry()
