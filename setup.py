"""Builds the C extension wkbfit._core; all metadata lives in pyproject.toml.

GSL is located from, in order: the environment (GSL_CFLAGS and GSL_LIBS),
`pkg-config gsl`, then `gsl-config`.
"""
import glob
import os
import shlex
import subprocess
import sys

import numpy
from setuptools import Extension, setup


def _run(cmd):
    try:
        return subprocess.run(cmd, check=True, capture_output=True, text=True).stdout.strip()
    except (OSError, subprocess.CalledProcessError):
        return None


def gsl_flags():
    cflags, libs = os.environ.get("GSL_CFLAGS"), os.environ.get("GSL_LIBS")
    if cflags is not None or libs is not None:
        return shlex.split(cflags or ""), shlex.split(libs or "-lgsl -lgslcblas -lm")
    cflags, libs = _run(["pkg-config", "--cflags", "gsl"]), _run(["pkg-config", "--libs", "gsl"])
    if libs is not None:
        return shlex.split(cflags or ""), shlex.split(libs)
    cflags, libs = _run(["gsl-config", "--cflags"]), _run(["gsl-config", "--libs"])
    if libs is not None:
        return shlex.split(cflags or ""), shlex.split(libs)
    sys.exit("wkbfit needs the GNU Scientific Library (GSL) headers and libraries, and neither "
             "pkg-config nor gsl-config found them. Install them (Debian/Ubuntu: "
             "'apt-get install libgsl-dev pkg-config'; Fedora: 'dnf install gsl-devel'; "
             "conda: 'conda install gsl'), or set GSL_CFLAGS and GSL_LIBS.")


cflags, libs = gsl_flags()
core = Extension(
    "wkbfit._core",
    sources=sorted(glob.glob("csrc/*.c")),
    depends=sorted(glob.glob("csrc/*.h")),
    include_dirs=[numpy.get_include(), "csrc"],
    extra_compile_args=cflags + ["-O2", "-std=c99", "-Wall", "-Wextra", "-Wno-unused-parameter",
                                 "-Wno-missing-field-initializers"],
    extra_link_args=libs,
    define_macros=[("NPY_NO_DEPRECATED_API", "NPY_1_7_API_VERSION")],
)
setup(ext_modules=[core])
