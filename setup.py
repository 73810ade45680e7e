"""Package list: everything under src/ plus the bundled sample sites (see pyproject.toml)."""
from setuptools import find_packages, setup

setup(packages=find_packages("src") + ["fillstress.sample_sites"])
