"""The ``pinflow`` command installed by pip: the same command line as the
Rust binary (``pinflow::cli::main_with``), run through the extension."""

import signal
import sys

from . import _native


def main() -> None:
    """Entry point of the ``pinflow`` console script."""
    # Ctrl-C stops the command as it stops the binary (Python's own
    # handler would wait for the extension to return).
    signal.signal(signal.SIGINT, signal.SIG_DFL)
    sys.exit(_native.run_cli(["pinflow", *sys.argv[1:]]))


if __name__ == "__main__":
    main()
