"""`python -m carrypipe`: the command line, for when the `carrypipe` script is not on PATH."""

from .cli import main

main(prog_name="carrypipe")
