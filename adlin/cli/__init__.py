"""The ``adlin`` command line (``adlin.cli.main:main``); see `adlin.cli.main`."""

from .main import main as main
