# wkbfit: set-up, build, demo and tests.  `make demo` and `make test` do everything on a fresh machine.
PYTHON ?= python3
PIP = PIP_ROOT_USER_ACTION=ignore $(PYTHON) -m pip --disable-pip-version-check
# the build tools' deprecation chatter is not for users
QUIET = PYTHONWARNINGS=ignore
# Build steps take this lock so that parallel builds in one work tree do not collide.
LOCK = flock /tmp/wkbfit-build.lock

.PHONY: demo test sanitize setup system-deps python-deps build benchmark clean

demo: setup
	$(PYTHON) -m wkbfit demo

test: setup
	$(PYTHON) -m pytest -q tests

# The suite against a copy of the package whose extension is built with AddressSanitizer and UBSan
# (build/sanitize; the in-place build is left alone). A Python that is not itself instrumented needs the
# ASan runtime loaded first: LD_PRELOAD=$$(gcc -print-file-name=libasan.so). Python's own allocations are
# never freed at exit, so leak detection is off (detect_leaks=0); libstdc++ is preloaded as well, or ASan's
# C++ exception interceptor fails in C++ extensions (matplotlib, in the notebook test); any other report aborts the run
# (UB included: -fno-sanitize-recover). The fuzz test runs too, in its sanitized child processes.
SAN_DIR = build/sanitize
SAN_FLAGS = -fsanitize=address,undefined,float-cast-overflow -fno-sanitize-recover=all -fno-omit-frame-pointer -g -O1
sanitize: setup
	@rm -rf $(SAN_DIR) && mkdir -p $(SAN_DIR)/pkg && cp -r pkg/wkbfit $(SAN_DIR)/pkg/ && rm -f $(SAN_DIR)/pkg/wkbfit/_core*.so
	@$(LOCK) env $(QUIET) CFLAGS="$(SAN_FLAGS)" LDFLAGS="-fsanitize=address,undefined,float-cast-overflow" \
	  $(PYTHON) setup.py -q build_ext --build-lib $(SAN_DIR)/pkg --build-temp $(SAN_DIR)/tmp
	WKBFIT_PKG_DIR=$(CURDIR)/$(SAN_DIR)/pkg LD_PRELOAD="$$(gcc -print-file-name=libasan.so) $$(gcc -print-file-name=libstdc++.so)" \
	  ASAN_OPTIONS=detect_leaks=0:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
	  $(PYTHON) -m pytest -q -p no:cacheprovider tests

benchmark: setup
	$(PYTHON) tests/benchmarks/run_all.py

setup: system-deps python-deps build

# GSL headers and libraries (libgsl-dev) and pkg-config, through apt-get when missing.
system-deps:
	@if pkg-config --exists gsl 2>/dev/null || gsl-config --version >/dev/null 2>&1; then :; \
	elif command -v apt-get >/dev/null 2>&1; then \
	  SUDO=""; [ "$$(id -u)" = 0 ] || SUDO="sudo"; \
	  echo "wkbfit: installing libgsl-dev and pkg-config with apt-get"; \
	  $$SUDO env DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
	  $$SUDO env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq libgsl-dev pkg-config || \
	  { echo "wkbfit: could not install libgsl-dev with apt-get; install the GSL development package (libgsl-dev) and retry"; exit 1; }; \
	else echo "wkbfit: the GSL development files are missing and apt-get is not available; install GSL (e.g. 'dnf install gsl-devel' or 'conda install gsl') and retry"; exit 1; fi

python-deps:
	@$(PYTHON) -c "import numpy, scipy, pytest, mpmath, periodictable, pandas, matplotlib, nbclient, nbformat, ipykernel, setuptools, wheel, tqdm, distributed, build" 2>/dev/null || \
	  $(PIP) install -q numpy scipy pytest mpmath "periodictable>=2" pandas matplotlib nbclient nbformat ipykernel setuptools wheel tqdm "dask[distributed]" build

# The extension built in place, and an editable install of this tree (pkg/) unless it is installed already.
build:
	@$(LOCK) env $(QUIET) $(PYTHON) setup.py -q build_ext --inplace
	@$(PYTHON) -c "import os, sys, wkbfit; sys.exit(os.path.realpath(wkbfit.__file__) != os.path.realpath('pkg/wkbfit/__init__.py'))" 2>/dev/null || \
	  $(LOCK) env $(QUIET) $(PIP) install -q --no-build-isolation --no-deps -e .

clean:
	rm -rf build pkg/wkbfit/_core*.so pkg/*.egg-info
