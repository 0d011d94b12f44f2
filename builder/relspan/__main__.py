"""``python -m relspan`` is the same as the ``relspan`` command."""

from relspan.cli import main

if __name__ == "__main__":  # pragma: no cover - exercised through subprocess tests
    raise SystemExit(main())
