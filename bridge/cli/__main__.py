"""`python -m bridge.cli` runs the command line."""
from . import main

main()
