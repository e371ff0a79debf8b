"""Seeded random calls of every public entry point (tests/fuzz_api.py), run in a child process under a
watchdog: no crash, no hang (a per-call time limit), no silent non-finite result, and every exception
a ValueError/TypeError with a message of ours.

The default run makes WKBFIT_FUZZ_CASES calls (default 2500) with seed WKBFIT_FUZZ_SEED (default 20261202);
set them for longer runs, e.g. WKBFIT_FUZZ_CASES=100000. Replay one case with
`python tests/fuzz_api.py --seed SEED --start INDEX --count 1 --show`.
"""
import os
import sys
import time

import pytest

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import fuzz_api  # noqa: E402

CASES = int(os.environ.get("WKBFIT_FUZZ_CASES", "2500"))
SEED = int(os.environ.get("WKBFIT_FUZZ_SEED", "20261202"))
TIMEOUT = float(os.environ.get("WKBFIT_FUZZ_TIMEOUT", "60"))


def test_fuzz_public_api():
    t0 = time.monotonic()
    results = fuzz_api.run(SEED, CASES, timeout=TIMEOUT)
    text = fuzz_api.summary(results, time.monotonic() - t0)
    print("\nfuzz (seed %d): %s" % (SEED, text))
    assert sum(len(v) for v in results.values()) == CASES, text
    problems = {k: results[k][:10] for k in ("crash", "hang", "nonfinite", "unclear") if results[k]}
    assert not problems, "%s\nfirst problems: %r" % (text, problems)
    # the generator must reach past the argument checks: a fair share of calls return results
    assert len(results["ok"]) > 0.25 * CASES, text


def test_watchdog_reports_hangs_and_crashes(tmp_path, monkeypatch):
    # the harness itself: a case that sleeps counts as a hang, one that kills its process as a crash,
    # and the run goes on with the next case in a fresh worker
    calls = tmp_path / "plan.txt"
    calls.write_text("ok\nhang\ncrash\nok\n")
    monkeypatch.setenv("WKBFIT_FUZZ_PLAN", str(calls))
    results = fuzz_api.run(0, 4, timeout=2.0)
    assert [i for i, _ in results["hang"]] == [1]
    assert [i for i, _ in results["crash"]] == [2]
    assert sorted(i for i, _ in results["ok"]) == [0, 3]
