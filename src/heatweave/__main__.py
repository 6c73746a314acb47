"""``python -m heatweave``: the same command line as the installed ``heatweave`` script."""

from heatweave.cli import entry

if __name__ == "__main__":
    entry()
