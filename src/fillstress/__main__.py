"""``python -m fillstress``: the same command as ``fillstress``."""
from .cli import command

if __name__ == "__main__":
    command()
