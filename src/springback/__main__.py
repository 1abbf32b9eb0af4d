"""`python -m springback`: the same as the `springback` command."""

from springback.cli import main

main()
