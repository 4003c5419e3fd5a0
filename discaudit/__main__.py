"""``python -m discaudit``: the same command line as the ``discaudit`` console script."""

from discaudit.cli import main

if __name__ == "__main__":
    raise SystemExit(main())
