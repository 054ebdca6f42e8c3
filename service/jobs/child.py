"""A solver process: ``python -m service.jobs.child PARENT_PID``.

Reads work from stdin and answers on stdout, one length-prefixed pickle per message
(see :mod:`service.jobs.runner`). It dies with its parent (``PR_SET_PDEATHSIG``), so an
API worker killed with SIGKILL never leaves a solve running behind it.
"""

from __future__ import annotations

import ctypes
import os
import signal
import sys
import threading

PR_SET_PDEATHSIG = 1


def _die_with_parent(parent: int) -> None:
    try:
        ctypes.CDLL("libc.so.6", use_errno=True).prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
    except (OSError, AttributeError):  # not Linux: the parent still kills us on every timeout
        pass
    if os.getppid() != parent:  # the parent died before prctl took effect
        os._exit(1)


def main() -> None:
    """Serve solve messages from stdin until the parent closes it.

    ``sys.argv[1]`` is the parent's pid: on Linux the process arranges to be killed
    when the parent dies, and it exits at once if the parent is already gone. It
    writes a ``("ready", pid)`` frame once the solver libraries are imported, so the
    parent's start-up wait covers the import cost, then answers each message with the
    reply of :func:`service.jobs.work.handle`. The frames go to the original stdout;
    file descriptor 1 is pointed at stderr so stray prints cannot corrupt them.
    """
    _die_with_parent(int(sys.argv[1]))
    from ..memory import retain_freed_memory

    retain_freed_memory()
    # Ctrl-C in a terminal reaches the whole process group; the parent decides our fate.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    # The protocol owns the original stdout; stray prints from libraries go to stderr.
    out = os.dup(1)
    os.dup2(2, 1)
    inp = sys.stdin.fileno()
    from .frames import read_frame, write_frame
    from .work import handle  # imports numpy, OR-Tools and the kinds once, before "ready"

    write_frame(out, ("ready", os.getpid()))
    lock = threading.Lock()  # progress may be reported from a solver's own threads

    def report(document: dict) -> None:
        """Send one ``("progress", document)`` frame, serialised with the reply frames.

        Parameters
        ----------
        document : dict
            A progress report of the running solve.
        """
        with lock:
            write_frame(out, ("progress", document))

    while True:
        message = read_frame(inp)
        if message is None:
            return
        reply = handle(message, report)
        # Free the last problem before the next one is read, so its memory is reused.
        del message
        with lock:
            write_frame(out, reply)
        del reply


if __name__ == "__main__":
    main()
