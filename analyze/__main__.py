"""``python -m analyze`` runs the ``dynshare`` command line."""

from analyze.cli.main import main

if __name__ == "__main__":
    raise SystemExit(main())
