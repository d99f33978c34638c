"""`python -m chainlint`."""

from chainlint.cli import main

main()
