"""Packaging: `python -m build` makes an sdist and a wheel; the wheel installs into a fresh virtual
environment (pip with this machine's index configuration; GSL from the system) and works there.

Slow (about a minute: a C build in an isolated environment and a pip install); it runs in the suite
because "pip install ." is how users get wkbfit.
"""
import glob
import os
import shutil
import subprocess
import sys
import textwrap

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

pytest.importorskip("build", reason="the packaging test needs the 'build' frontend (pip install build)")

SMOKE = textwrap.dedent("""
    import math, os, sys
    import wkbfit
    assert os.path.realpath(wkbfit.__file__).startswith(os.path.realpath(sys.prefix)), wkbfit.__file__
    # Morse levels [P. M. Morse, Phys. Rev. 34, 57 (1929)]: G(v) = we (v+1/2) - wexe (v+1/2)^2,
    # we = 2 a sqrt(De C/mu), wexe = a^2 C/mu with C = hbar^2/(2u); the textbook first-order WKB rule
    # (order=1) is exact for Morse, and so is the default rule low in the well (checked below as well)
    De, re, a, mu = 42341.9, 1.27455, 1.75194, 0.979592539
    C = wkbfit.HBAR2_OVER_2U / mu
    table = wkbfit.levels(wkbfit.Morse(De=De, re=re, a=a), mu, v=[0, 3, 10], order=1)
    default = wkbfit.levels(wkbfit.Morse(De=De, re=re, a=a), mu, v=[0, 3, 10])
    assert max(abs(default.energy - table.energy)) < 1e-6, default.energy - table.energy
    for v, E in zip(table.v, table.energy):
        x = v + 0.5
        expected = 2 * a * math.sqrt(De * C) * x - a * a * C * x * x
        assert abs(E - expected) < 1e-8, (v, E, expected)
    print("smoke ok", wkbfit.__version__, len(wkbfit.levels(wkbfit.Morse(De=De, re=re, a=a), mu)))
""")


def _run(cmd, **kw):
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=900, **kw)
    assert done.returncode == 0, "%s failed:\n%s\n%s" % (" ".join(cmd), done.stdout[-3000:], done.stderr[-3000:])
    return done


def test_build_sdist_and_wheel_and_install_into_a_fresh_venv(tmp_path):
    dist = tmp_path / "dist"
    # the build frontend makes the sdist, then the wheel from the unpacked sdist (so the sdist is complete)
    _run([sys.executable, "-m", "build", "--outdir", str(dist), ROOT],
         env=dict(os.environ, PYTHONWARNINGS="ignore"))
    sdists = glob.glob(str(dist / "wkbfit-*.tar.gz"))
    wheels = glob.glob(str(dist / "wkbfit-*.whl"))
    assert len(sdists) == 1 and len(wheels) == 1
    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", str(venv)])
    python = str(venv / "bin" / "python")
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME")}
    # pip reads this machine's index configuration (pip.conf / PIP_* variables): numpy comes from there
    _run([python, "-m", "pip", "install", "--disable-pip-version-check", "-q", wheels[0]], env=env)
    out = _run([python, "-c", SMOKE], cwd=str(tmp_path), env=env).stdout
    assert "smoke ok 0.1.0" in out
    # the console entry point
    out = _run([str(venv / "bin" / "wkbfit"), "levels", "morse", "De=42341.9", "re=1.27455", "a=1.75194",
                "--mu", "0.979592539", "-v", "0"], cwd=str(tmp_path), env=env).stdout
    assert "1482.27287" in out  # G(0) of the smoke test's Morse curve (formula above)
    shutil.rmtree(venv)
