"""``python -m atlas``: the same as the ``approx-atlas`` command."""

from atlas.cli import main

if __name__ == "__main__":
    raise SystemExit(main())
