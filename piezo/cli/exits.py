"""Exit codes of the command line (documented in the README).

0 success; 1 the analysis ran and found a failure (``check``, ``batch``); 2 unusable
input or options; 3 an internal error (a bug); 130 interrupted (Ctrl-C). A module of
its own so that command modules can name them without importing :mod:`piezo.cli`, which
loads the commands.
"""

__all__ = ["EXIT_FAILED", "EXIT_INTERNAL", "EXIT_INTERRUPTED", "EXIT_OK", "EXIT_USAGE"]

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2
EXIT_INTERNAL = 3
#: 128 + SIGINT, as shells report a process ended by Ctrl-C.
EXIT_INTERRUPTED = 130
