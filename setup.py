"""Build the optional compiled search kernels; the rest of the project is declared in pyproject.toml.

With Cython present the ``.pyx`` sources are translated to C here; without it
the C files shipped in the source distribution are compiled instead. Either way
the extensions are optional: with no C compiler the package installs and runs
on the pure-Python engine (``worker.engine.kernels.COMPILED`` is then False).
"""

from __future__ import annotations

import logging
import os

from setuptools import Extension, setup
from setuptools.command.build_ext import build_ext

logger = logging.getLogger(__name__)

KERNEL_DIR = os.path.join("worker", "engine", "kernels")
KERNELS = ("_tables", "_search", "_grid", "_tiles")
DIRECTIVES = {
    "language_level": 3,
    "boundscheck": False,
    "wraparound": False,
    "cdivision": True,
    "initializedcheck": False,
}
# Parity with the pure-Python engine needs plain IEEE double arithmetic:
# no fused multiply-add, no fast-math reassociation.
UNIX_FLAGS = ["-O3", "-ffp-contract=off", "-fno-fast-math"]


def _extensions() -> list[Extension]:
    """Return the kernel extensions, from the .pyx sources if Cython is here, else from the shipped .c."""
    try:
        from Cython.Build import cythonize
    except ImportError:
        cythonize = None
    exts = []
    for name in KERNELS:
        base = os.path.join(KERNEL_DIR, name)
        if cythonize is not None and os.path.exists(base + ".pyx"):
            exts += cythonize([Extension(f"worker.engine.kernels.{name}", [base + ".pyx"])],
                              compiler_directives=DIRECTIVES, quiet=True)
        elif os.path.exists(base + ".c"):
            exts.append(Extension(f"worker.engine.kernels.{name}", [base + ".c"]))
    for ext in exts:
        ext.optional = True  # cythonize() returns fresh Extension objects without it
    return exts


class OptionalBuildExt(build_ext):
    """Build the kernels when a C compiler works; otherwise warn and install pure Python."""

    def build_extensions(self) -> None:
        if self.compiler.compiler_type == "unix":
            for ext in self.extensions:
                ext.extra_compile_args = list(ext.extra_compile_args or []) + UNIX_FLAGS
        super().build_extensions()

    def run(self) -> None:
        try:
            super().run()
        except Exception as err:  # no compiler at all fails before the per-extension 'optional'
            logger.warning("compiled search kernels not built (%s); the pure-Python engine will be used", err)


setup(ext_modules=_extensions(), cmdclass={"build_ext": OptionalBuildExt})
