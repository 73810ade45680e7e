"""The version, for the package face, the command and the manifest.

A literal, read by the build (pyproject ``[tool.setuptools.dynamic]``), so that
``fillstress --version`` answers without importing importlib.metadata.
"""
__version__ = "0.1.0"
