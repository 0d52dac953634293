"""python -m bitmend: the command line."""

from bitmend.cli import main

main()
