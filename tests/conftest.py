"""Test configuration: import wkbfit from this work tree (pkg/), whatever else is installed.

WKBFIT_PKG_DIR points elsewhere (a directory holding wkbfit/); `make sanitize` uses it for its build.
"""
import os
import sys

sys.path.insert(0, os.path.abspath(os.environ.get("WKBFIT_PKG_DIR") or
                                   os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "pkg")))
