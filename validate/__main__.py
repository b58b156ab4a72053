"""`python -m milepost.validate` runs the command line."""

from milepost.validate.cli import main

main()
