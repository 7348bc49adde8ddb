"""``python -m atlas`` runs the command line."""

from .cli import main

main(prog_name="atlas")
