"""`python -m checker` runs the command line."""

from checker.cli import main_exit

main_exit()
