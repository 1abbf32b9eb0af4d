"""The command line. Thin: parses, calls the library, prints; maps errors to exit codes.

`main` is the `springback` command (made in `core`); each module adds its own commands to it.
"""

from springback.cli import gate, preview, send, translations
from springback.cli.core import main

for _module in (gate, preview, send, translations):
    _module.register(main)

__all__ = ["main"]
