"""Build step for the one compiled kernel (the banded interior-point iterations); everything
else about the package is declared in pyproject.toml.

The kernel uses only the Python C API's buffer protocol, so a C compiler is all it needs. It is
optional: where it cannot be built the package still installs, and the banded QP backend hands
every QP to Clarabel (and says so in the profile's notes).
"""

from setuptools import Extension, setup

setup(ext_modules=[Extension("curvespeed.solvers._banded_ipm",
                             ["src/curvespeed/solvers/_banded_ipm.c"],
                             extra_compile_args=["-O3", "-std=c99"],
                             optional=True)])
