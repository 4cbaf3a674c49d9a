"""The last stage of the pipeline: study files, the command line and the report."""

from ._main import main

__all__ = ["main"]
