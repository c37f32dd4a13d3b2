"""`python -m selector`: the command line."""

from selector.cli import main

if __name__ == "__main__":
    main()
