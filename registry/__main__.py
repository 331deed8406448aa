"""``python -m registry`` and the ``prespec`` script: Ctrl-C while prespec is still starting (importing)
ends it as one during a command does, with "prespec: interrupted" and status 130, no traceback."""

import gc
import os
import sys


def entry() -> None:
    # prespec's matrices are a few rows across, and its parallel work runs in processes, one per
    # core; OpenBLAS's own threads (one per core, started as numpy loads) would only spin beside
    # them and slow them down. One thread each, unless the user has said otherwise.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    try:
        from .cli import main
    except KeyboardInterrupt:
        print("prespec: interrupted", file=sys.stderr)
        sys.exit(130)
    status = main()
    # The process ends here: its objects need no last collection. Frozen, the garbage collector's
    # passes while the interpreter shuts down skip them (a tenth of a second after a check, a
    # sixth of the whole run); atexit handlers and finalizers run as ever.
    gc.freeze()
    sys.exit(status)


if __name__ == "__main__":
    entry()
