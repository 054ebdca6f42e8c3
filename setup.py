"""Build the one compiled module (the request-body scanner); everything else is in pyproject.toml.

The extension is optional: where it cannot be built (no C compiler), the service
still installs and answers every request through the ordinary JSON decode, only
slower on large bodies (``service.api.fastarcs`` steps aside when it is missing).
"""

from Cython.Build import cythonize
from setuptools import Extension, setup

setup(
    ext_modules=cythonize(
        [Extension("service.api._arcscan", ["service/api/_arcscan.pyx"], extra_compile_args=["-O3"],
                   optional=True)],
        compiler_directives={"language_level": 3},
    ),
)
