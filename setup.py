"""Build the compiled modules; everything else is in pyproject.toml.

- ``service.model._arcscan``: the request-body scanner (``service.model.fastarcs`` in front);
- ``service.model._firstseen``: integer node ids numbered in one pass.

Both are optional: where they cannot be built (no C compiler), the service still
installs and answers every request through numpy and the ordinary JSON decode, only
slower on large bodies.
"""

from Cython.Build import cythonize
from setuptools import Extension, setup

setup(
    ext_modules=cythonize(
        [Extension("service.model._arcscan", ["service/model/_arcscan.pyx"], extra_compile_args=["-O3"],
                   optional=True),
         Extension("service.model._firstseen", ["service/model/_firstseen.pyx"], extra_compile_args=["-O3"],
                   optional=True)],
        compiler_directives={"language_level": 3},
    ),
)
