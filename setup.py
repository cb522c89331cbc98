"""Package list for setuptools, found rather than written out.

Everything else is in pyproject.toml.  This file exists only because the
repository's top-level io/ folder installs as ``spaceframe.io``, and the
``[tool.setuptools.packages.find]`` table cannot rename what it finds: it
would find io/ as a top-level package ``io`` (shadowing the standard library)
or miss it.  So the packages are found here, under both roots, and every
new subpackage (a folder with an ``__init__.py``) ships without a list to
keep up; tests/test_packaging.py builds a wheel and checks its contents.
"""

from setuptools import find_packages, setup

PACKAGES = [
    *find_packages(include=["spaceframe", "spaceframe.*"]),
    "spaceframe.io",
    *(f"spaceframe.io.{name}" for name in find_packages("io")),
]

setup(packages=PACKAGES, package_dir={"spaceframe.io": "io"})
