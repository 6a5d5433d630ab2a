"""``python -m piezo`` runs the command line."""

from piezo.cli import main

if __name__ == "__main__":
    main()
