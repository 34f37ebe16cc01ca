"""``python -m lossbudget``: the command line."""

from lossbudget.cli import main

main()
