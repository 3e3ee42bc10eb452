"""``python -m prunebench``: the same command line as the ``prunebench`` script."""

from prunebench.cli import main

if __name__ == "__main__":
    main(prog_name="prunebench")
