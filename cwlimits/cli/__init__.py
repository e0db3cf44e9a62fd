"""The command line: ``main(argv) -> int`` and one module per subcommand.

:mod:`.app` parses the arguments, finds the subcommands in :mod:`.commands`, dispatches and
maps errors to exit codes (2 for bad input).  The commands hold no physics: they validate
their inputs and outputs, call the library and print.  ``--help`` imports no numerical
package.
"""

from .app import (
    build_parser,
    main,
)

__all__ = ["main", "build_parser"]
