"""The ``gfla`` command line (installed as the package ``gfla.cli``).

Nothing heavy is imported here or in :mod:`.main` at import time: the numerical parts of
gfla are imported inside each command, so ``gfla --help`` answers quickly.
"""
