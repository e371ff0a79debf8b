"""The C core compiles without warnings under -Wall -Wextra (the flags setup.py builds with).

-Wno-unused-parameter: CPython method functions and model callbacks have fixed signatures whose
arguments are not all used; -Wno-missing-field-initializers: `= {0}` initialisers. Both as in setup.py.
"""
import glob
import os
import shutil
import subprocess
import sysconfig

import numpy as np
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
FLAGS = ["-std=c99", "-O2", "-Wall", "-Wextra", "-Wno-unused-parameter", "-Wno-missing-field-initializers"]


@pytest.mark.skipif(shutil.which("gcc") is None, reason="no gcc on this machine")
def test_core_compiles_without_warnings():
    setup_py = open(os.path.join(ROOT, "setup.py")).read()
    for flag in FLAGS[2:]:
        assert '"%s"' % flag in setup_py  # the same flags as the real build
    gsl = subprocess.run(["pkg-config", "--cflags", "gsl"], capture_output=True, text=True).stdout.split()
    includes = ["-I" + np.get_include(), "-I" + sysconfig.get_paths()["include"], "-I" + os.path.join(ROOT, "csrc")]
    warnings = []
    for source in sorted(glob.glob(os.path.join(ROOT, "csrc", "*.c"))):
        done = subprocess.run(["gcc", "-c", "-o", os.devnull] + FLAGS + gsl + includes + [source],
                              capture_output=True, text=True)
        assert done.returncode == 0, done.stderr
        warnings += [line for line in done.stderr.splitlines() if "warning:" in line]
    assert not warnings, "\n".join(warnings)
