"""``python -m registry`` and the ``prespec`` script: Ctrl-C while prespec is still starting (importing)
ends it as one during a command does, with "prespec: interrupted" and status 130, no traceback."""

import sys


def entry() -> None:
    try:
        from .cli import main
    except KeyboardInterrupt:
        print("prespec: interrupted", file=sys.stderr)
        sys.exit(130)
    sys.exit(main())


if __name__ == "__main__":
    entry()
