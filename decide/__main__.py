"""``python -m decide``: the same command line as ``decide``."""

from decide.cli import main

if __name__ == "__main__":
    main()
