"""``python -m divides``: the same as the ``divides`` command."""

from divides.cli.app import main

__all__: list[str] = []

if __name__ == "__main__":
    main()
