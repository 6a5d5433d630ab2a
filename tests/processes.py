"""Child processes for the interrupt tests.

A shell starts a background job with SIGINT ignored, and a child inherits that: Python
then installs no KeyboardInterrupt handler, and an interrupt test would wait in vain.
The children these tests interrupt restore the default first, so the tests give the
same answer whether the suite runs in a terminal, in CI or as a background job.
"""

from __future__ import annotations

import signal


def interruptible() -> None:
    """``preexec_fn`` for :class:`subprocess.Popen`: SIGINT back to its default action."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)
