"""Seeded random calls of every public entry point of wkbfit, run under a watchdog.

Each case is made from its own generator, numpy.random.default_rng([seed, index]), so that any
case can be replayed alone (`python tests/fuzz_api.py --seed S --start I --count 1 --show`).
Values are mostly plausible (so that the calls reach deep into the code) with a share of hostile
ones: extreme magnitudes, NaN/inf, booleans, strings, None, big integers, arrays of wrong shape.

Every call ends in one of these outcomes:
  ok        returned, and every number in the result that should be finite is finite
  clear     raised ValueError/TypeError whose message names what is wrong (not a bare
            NumPy/Python conversion message)
  unclear   raised anything else, or a ValueError/TypeError with a bare internal message
  nonfinite returned a non-finite number where a finite one is promised
  crash     the worker process died (a segfault, an abort)
  hang      no answer within the per-call time limit (the worker is killed)

The watchdog (`run`) runs the cases in a child process and restarts it after a crash or a hang,
so a hang fails the test instead of freezing the suite.
"""
import argparse
import io
import json
import math
import os
import select
import subprocess
import sys
import tempfile
import time
import traceback
import warnings

HERE = os.path.dirname(os.path.abspath(__file__))
# absolute: the CLI cases and the tests start child processes in other directories
PKG = os.path.abspath(os.environ.get("WKBFIT_PKG_DIR") or os.path.join(os.path.dirname(HERE), "pkg"))

OUTCOMES = ("ok", "clear", "unclear", "nonfinite", "crash", "hang")

#: messages that come from NumPy or Python's own conversions, not from a check of ours
INTERNAL_PHRASES = (
    "only 0-dimensional", "only length-1", "only integer scalar", "float() argument", "int() argument",
    "cannot be interpreted as an integer", "could not convert", "object of type", "unsupported operand",
    "not subscriptable", "has no len", "'NoneType'", "is not iterable", "invalid literal", "int too large",
    "too large to convert", "setting an array element", "must be real number", "unhashable", "not callable",
    "object has no attribute", "index out of", "list index", "out of bounds", "can't multiply",
    "must be str, not", "argument must be", "can only concatenate", "not supported between",
    "input domain error", "a bytes-like object", "cannot unpack", "too many values", "not enough values",
    "truth value of an array", "Cannot cast", "ufunc",
)


# ------------------------------------------------------------------------------ value generators
class Gen:
    def __init__(self, rng):
        self.rng = rng

    def chance(self, p):
        return self.rng.random() < p

    def pick(self, seq):
        return seq[int(self.rng.integers(len(seq)))]

    def hostile(self):
        import numpy as np
        return self.pick([
            float("nan"), float("inf"), -float("inf"), 0.0, -0.0, -1.0, 1e308, -1e308, 1e-308, 5e-324,
            True, False, None, "1.0", "", "yes", b"1", [1.0], [[1.0, 2.0]], (), {}, 2 ** 32 + 2, 10 ** 20, -(2 ** 63),
            10 ** 400, complex(1, 1), np.float32(3.0), np.array(2.0), np.array([1.0, 2.0]), np.int64(7),
            np.array([[1.0]]), object(), 1e300, -1e300,
        ])

    def real(self, typical, spread=3.0, hostile=0.08, extreme=0.05):
        """Around `typical` (log-uniform within a factor `spread`), sometimes extreme or hostile."""
        if self.chance(hostile):
            return self.hostile()
        if self.chance(extreme):
            return float(self.pick([-1, 1]) * 10.0 ** self.rng.uniform(-300, 300))
        return float(typical * math.exp(self.rng.uniform(-math.log(spread), math.log(spread))))

    def signed(self, typical, spread=3.0):
        """real() with a random sign (hostile values keep theirs)."""
        x = self.real(typical, spread)
        return x * self.pick([-1, 1]) if isinstance(x, float) else x

    def negative(self, typical, spread=3.0):
        x = self.real(typical, spread)
        return -x if isinstance(x, float) else x

    def count(self, typical_max, hostile=0.06):
        if self.chance(hostile):
            return self.hostile()
        return int(self.rng.integers(0, typical_max + 1))

    def int_list(self, typical_max, n_max=5, hostile=0.06):
        if self.chance(hostile):
            return self.hostile()
        n = int(self.rng.integers(1, n_max + 1))
        out = [self.count(typical_max, hostile=0.02) for _ in range(n)]
        return out[0] if self.chance(0.3) else out


# ------------------------------------------------------------------------------ potentials and masses
def make_potential(g):
    import wkbfit
    kind = g.pick(["morse", "lj", "pt", "emo", "mlr", "morse", "lj", "pointwise"])
    De = g.real(5000.0, 10.0)
    re = g.real(3.0, 2.0)
    if kind == "morse":
        return wkbfit.Morse(De=De, re=re, a=g.real(1.0, 3.0))
    if kind == "lj":
        m = g.pick([6.0, 4.0, 3.0, 6.0, g.real(5.0, 1.5)])
        n = g.pick([12.0, 10.0, 8.0, g.real(11.0, 1.5)])
        return wkbfit.LennardJones(De=De, re=re, n=n, m=m)
    if kind == "pt":
        return wkbfit.PoschlTeller(De=De, re=g.real(20.0, 2.0), a=g.real(1.0, 3.0))
    if kind == "emo":
        k = int(g.rng.integers(1, 4))
        betas = [g.real(1.0, 2.0)] + [g.signed(0.1, 3.0) for _ in range(k - 1)]
        return wkbfit.EMO(De=De, re=re, betas=betas, p=g.pick([2, 3, 4, 6]))
    if kind == "mlr":
        k = int(g.rng.integers(1, 3))
        betas = [g.signed(0.5, 3.0) for _ in range(k)]
        return wkbfit.MLR(De=De, re=re, C6=g.real(1e6, 30.0), betas=betas, q=g.pick([2, 3, 4]),
                          p=g.pick([5, 6]))
    # a point-wise curve sampled from a Morse curve, sometimes damaged
    import numpy as np
    n = int(g.rng.integers(3, 40))
    r = np.linspace(0.7 * 3.0, 3.0 * 3.0, n)
    V = 5000.0 * (1 - np.exp(-1.0 * (r - 3.0))) ** 2
    if g.chance(0.2):
        V = V.tolist()
        V[int(g.rng.integers(n))] = g.hostile() if g.chance(0.5) else float("nan")
    if g.chance(0.1):
        r = r[::-1]
    kw = {}
    if g.chance(0.5):
        kw["asymptote"] = g.real(5000.0, 1.2)
    if g.chance(0.3):
        kw["tail_power"] = g.real(6.0, 2.0)
    return wkbfit.PointwisePotential(r, V, **kw)


def safe_potential(g):
    """A potential that should construct (falls back to a plain Morse curve)."""
    import wkbfit
    try:
        return make_potential(g)
    except (ValueError, TypeError):
        return wkbfit.Morse(De=5000.0, re=3.0, a=1.0)


def make_mu(g):
    if g.chance(0.15):
        return g.pick(["7Li133Cs", "1H35Cl", "H2", "HD", ("7Li", "133Cs"), ("7Li", 1e300), "Xx12", "12C16O",
                       [1.0, 2.0, 3.0], ("1H", "zz")])
    return g.real(5.0, 5.0)


# ------------------------------------------------------------------------------ checks of results
class NonFinite(Exception):
    pass


def finite(what, *arrays):
    import numpy as np
    for a in arrays:
        arr = np.asarray(a, dtype=float)
        if arr.size and not np.all(np.isfinite(arr)):
            raise NonFinite("%s: %r" % (what, arr.ravel()[~np.isfinite(arr.ravel())][:3]))


def check_table(t):
    finite("LevelTable", t.energy, t.binding_energy, t.inner_turning_point, t.outer_turning_point, t.Bv, t.dEdv,
           t.error)
    for J, vD in t.vD_by_J.items():
        if vD is not None:
            finite("vD", vD)


# ------------------------------------------------------------------------------ the entry points
def case_potential(g):
    import numpy as np
    pot = make_potential(g)
    r = g.pick([g.real(3.0, 3.0), [g.real(3.0, 2.0) for _ in range(3)], np.linspace(1, 10, 5), g.hostile()])
    method = g.pick(["call", "derivatives", "binding_depth", "param_derivatives", "asymptote", "repr"])
    if method == "call":
        finite("V", pot(r))
    elif method == "derivatives":
        finite("derivatives", *pot.derivatives(r))
    elif method == "binding_depth":
        finite("depth", pot.binding_depth(r))
    elif method == "param_derivatives":
        finite("dV/dp", pot.param_derivatives(r))
    elif method == "asymptote":
        finite("asymptote", pot.asymptote)
    else:
        repr(pot)
        if g.chance(0.5) and pot.param_names:
            pot.with_params(**{pot.param_names[0]: g.real(pot._params[0], 2.0)})


def case_levels(g):
    import wkbfit
    pot = safe_potential(g)
    kw = {}
    if g.chance(0.2):
        kw["order"] = g.pick([1, 2, 2.0, 3, "2", True, 1.5])
    if g.chance(0.15):
        kw["maslov"] = g.pick([(1, 1), (2, 1), (1, 2), (1.7, 1), (True, 1), "11", (1,), (1, 2, 3), (2.0, 2.0)])
    if g.chance(0.1):
        kw["langer"] = g.pick([True, False, "yes", 1, None])
    v = None if g.chance(0.5) else g.int_list(30)
    J = 0 if g.chance(0.5) else g.int_list(40, n_max=4)
    t = wkbfit.levels(pot, make_mu(g), v=v, J=J, **kw)
    check_table(t)
    table_methods(g, t)


def table_methods(g, t):
    """The LevelTable's own methods with plausible or hostile arguments."""
    what = g.pick(["level", "text", "dict", "getitem", "html", "none", "none"])
    if what == "level":
        t.level(g.count(5), g.count(3))
    elif what == "text":
        t.to_text()
        str(t)
    elif what == "dict":
        t.to_dict()
        t.describe()
    elif what == "getitem":
        try:
            t[g.pick(["energy", "v", "Bv", "nope", 3, None])]
        except KeyError as exc:  # the mapping protocol: a missing column is a KeyError that names it
            if "no column" not in str(exc):
                raise
    elif what == "html":
        t._repr_html_()


def case_exact(g):
    import wkbfit
    pot = safe_potential(g)
    v = g.int_list(4, n_max=3)
    J = 0 if g.chance(0.6) else g.int_list(10, n_max=2)
    check_table(wkbfit.levels(pot, make_mu(g), v=v, J=J, method="exact"))


def case_wavefunction(g):
    import wkbfit
    pot = safe_potential(g)
    r, u = wkbfit.exact_wavefunction(pot, make_mu(g), g.count(4), J=g.count(5))
    finite("wavefunction", r, u)


def case_compare(g):
    import wkbfit
    import numpy as np
    pot = safe_potential(g)
    c = wkbfit.compare_wkb_exact(pot, make_mu(g), J=g.count(3), v=g.int_list(3, n_max=2),
                                 order=g.pick([1, 2]))
    finite("comparison", c.difference, c.wkb_energy, c.exact_energy)
    str(c)
    c.to_text(uncertainty=g.real(0.01, 10.0))
    c.good_enough(g.real(0.01, 10.0))


def case_masses(g):
    import wkbfit
    what = g.pick(["reduced_mass", "isotope_mass", "parse", "as_reduced_mass"])
    if what == "reduced_mass":
        a = g.pick(["7Li", "133Cs", "D", "H", g.real(10.0, 10.0), g.hostile(), "99Zz"])
        b = g.pick(["7Li", "133Cs", "D", g.real(10.0, 10.0), g.hostile()])
        finite("reduced mass", wkbfit.reduced_mass(a, b))
    elif what == "isotope_mass":
        (wkbfit.isotope_mass if g.chance(0.5) else wkbfit.isotope_info)(g.pick(["7Li", "1H", "D", "T", "238U", "0H", "Li", g.hostile(), "1000Cs"]))
    elif what == "parse":
        wkbfit.parse_isotopologue(g.pick(["7Li133Cs", "H2", "HD", "1H35Cl", "12C-16O", "Li2", "", "7Li 7Li",
                                          g.hostile(), "127I2", "x" * 1000]))
    else:
        finite("mu", wkbfit.masses.as_reduced_mass(make_mu(g)))


def level_data(g, n_max=12):
    import numpy as np
    import wkbfit
    true = wkbfit.Morse(De=5000.0, re=3.0, a=1.0)
    n = int(g.rng.integers(1, n_max + 1))
    v = list(range(n))
    E = wkbfit.levels(true, 5.0, v=v).energy + g.rng.normal(0, 0.01, n)
    data = {"v": v, "J": [0] * n, "energy": E.tolist(), "uncertainty": [0.01] * n}
    for _ in range(int(g.rng.integers(0, 3))):
        col = g.pick(list(data))
        if isinstance(data[col], list) and data[col] and g.chance(0.7):
            data[col][int(g.rng.integers(len(data[col])))] = g.hostile()
        else:
            data[col] = g.hostile()
    if g.chance(0.1):
        data["isotopologue"] = [g.pick(["7Li133Cs", "H2", "", None, 3]) for _ in range(n)]
    return data


def case_read_levels(g):
    import numpy as np
    import wkbfit
    data = level_data(g)
    if g.chance(0.5):
        obs = wkbfit.read_levels(data, energy_zero=g.pick([None, "minimum", "lowest", "asymptote", "top", 3]))
    else:
        with tempfile.TemporaryDirectory() as d:
            path = os.path.join(d, "levels.csv")
            cols = list(data)
            lines = [",".join(cols)]
            try:
                n = max(len(data[c]) for c in cols if isinstance(data[c], list))
            except ValueError:
                n = 0
            for k in range(n):
                lines.append(",".join(str(data[c][k]) if isinstance(data[c], list) and k < len(data[c]) else
                                      str(data[c]) for c in cols))
            text = "\n".join(lines) + "\n"
            if g.chance(0.3):
                text = "\ufeff" + text
            if g.chance(0.1):
                text = text.replace(",", ";")
            raw = text.encode("utf-8")
            if g.chance(0.05):
                raw = raw[:int(g.rng.integers(len(raw) + 1))] + bytes([0xff, 0xfe])
            with open(path, "wb") as fh:
                fh.write(raw)
            obs = wkbfit.read_levels(path)
    finite("observed", obs.energy, obs.uncertainty)
    what = g.pick(["select", "masses", "text", "none"])
    if what == "select":
        obs.select(g.pick(obs.isotopologues + [g.hostile(), "Zz"]))
    elif what == "masses":
        obs.masses_by_isotopologue(g.pick([None, 5.0, {"7Li133Cs": 5.0}, g.hostile(), {None: 4.0}]))
    elif what == "text":
        str(obs)
        repr(obs)


_BASE_FIT = {}


def base_fit():
    """One small fit, made once per worker, as the starting point of result and JSON cases."""
    if "result" not in _BASE_FIT:
        import numpy as np
        import wkbfit
        true = wkbfit.Morse(De=5000.0, re=3.0, a=1.0)
        v = list(range(8)) * 2
        J = [0] * 8 + [5] * 8
        E = np.concatenate([wkbfit.levels(true, 5.0, v=list(range(8)), J=j).energy for j in (0, 5)])
        data = {"v": v, "J": J, "energy": (E + np.random.default_rng(1).normal(0, 0.01, 16)).tolist(),
                "uncertainty": [0.01] * 16}
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            _BASE_FIT["result"] = wkbfit.fit(wkbfit.Morse(De=5100.0, re=3.02, a=1.02), data, mu=5.0)
    return _BASE_FIT["result"]


def case_fit(g):
    import wkbfit
    data = level_data(g)
    pot = wkbfit.Morse(De=g.real(5000.0, 1.5), re=g.real(3.0, 1.1), a=g.real(1.0, 1.3)) if g.chance(0.8) else \
        safe_potential(g)
    kw = {}
    if g.chance(0.3):
        kw["vary"] = g.pick([["De", "a"], {"De": True}, ["zz"], "De", None, {"De": "yes"}])
    if g.chance(0.2):
        kw["bounds"] = g.pick([{"De": (1000.0, 1e5)}, {"De": (None, None)}, {"De": (1e5, 1)}, {"a": "x"}])
    if g.chance(0.2):
        kw["max_iterations"] = g.pick([1, 5, 0, -1, 2.5, True, 10 ** 30])
    if g.chance(0.1):
        kw["method"] = g.pick(["exact", "wkb", "rkr", 1])
    if g.chance(0.1):
        kw["scale_uncertainties"] = g.pick([True, False, "no"])
    result = wkbfit.fit(pot, data, mu=5.0 if g.chance(0.8) else make_mu(g), **kw)
    finite("fit", result.chi_square, list(result.values.values()))
    if g.chance(0.5):
        pred = result.predict(mu=g.pick([None, 5.0, g.real(5.0, 3.0)]), J=g.pick([0, 0, 3, g.count(20)]))
        finite("prediction", pred.energy, pred.binding_energy)
    if g.chance(0.3):
        result.report()


def case_result(g):
    result = base_fit()
    what = g.pick(["predict", "json", "json", "report"])
    if what == "predict":
        kw = {}
        if g.chance(0.5):
            kw["mu"] = make_mu(g)
        elif g.chance(0.3):
            kw["isotopologue"] = g.pick(["7Li133Cs", "none", g.hostile()])
        pred = result.predict(J=g.pick([0, 1, 10, g.count(50)]), **kw)
        finite("prediction", pred.energy, pred.binding_energy)
        pred.to_text()
    elif what == "report":
        result.report()
        result._repr_html_()
    else:
        data = json.loads(result.to_json())
        for _ in range(int(g.rng.integers(1, 4))):
            tamper(g, data)
        text = json.dumps(data, allow_nan=True) if g.chance(0.9) else g.pick(["{", "[]", "null", '{"a":' * 5000])
        loaded = type(result).load_json(text)
        finite("loaded", loaded.chi_square if loaded.chi_square is not None else 0.0)
        loaded.report()


def tamper(g, data):
    """Changes one entry somewhere in a nested dict/list."""
    node, key = data, None
    for _ in range(int(g.rng.integers(1, 5))):
        if isinstance(node, dict) and node:
            key = g.pick(sorted(node))
        elif isinstance(node, list) and node:
            key = int(g.rng.integers(len(node)))
        else:
            return
        child = node[key]
        if not isinstance(child, (dict, list)) or not child or g.chance(0.4):
            break
        node, key = child, None
    if key is None:
        return
    action = g.pick(["replace", "delete", "shorten"])
    if action == "delete" and isinstance(node, dict):
        del node[key]
    elif action == "shorten" and isinstance(node[key], list):
        node[key] = node[key][:-1]
    else:
        import numpy as np
        value = g.hostile()
        node[key] = value.tolist() if isinstance(value, np.ndarray) else value if isinstance(
            value, (int, float, str, list, dict, type(None), bool)) else str(value)


def case_rkr(g):
    import wkbfit
    G = [g.real(200.0, 2.0), g.negative(1.0, 3.0)] + ([g.signed(0.001, 10.0)] if g.chance(0.3) else [])
    B = [g.real(0.2, 3.0), g.negative(0.002, 3.0)]
    if g.chance(0.1):
        G = g.hostile()
    if g.chance(0.1):
        B = g.hostile()
    mu = make_mu(g)
    if g.chance(0.6):
        v = g.pick([[0, 1, 2, 5], g.real(3.0, 3.0), [-0.4, 0.0, 10.0], g.hostile(), [g.real(20.0, 5.0)]])
        t = wkbfit.rkr_turning_points(G, B, mu, v, quadrature_points=g.pick([100, 100, 32, 1024, 7, 100.0]))
        finite("rkr", t.energy, t.inner_turning_point, t.outer_turning_point)
    else:
        v = None if g.chance(0.5) else g.pick([[0, 1, 2, 3, 4], [0.5, 1.5], g.hostile()])
        pot = wkbfit.rkr_potential(G, B, mu, v=v)
        finite("rkr potential", pot(pot.r))


def case_cli(g):
    from wkbfit import cli
    sub = g.pick(["levels", "levels", "check", "fit", "junk"])
    argv = [sub]
    if sub == "levels":
        argv += [g.pick(["morse", "lennard-jones", "lj", "mlr", "zz"]),
                 "De=%s" % g.pick(["4000", "1e300", "-1", "nan", "x", str(g.real(4000.0, 3.0))]),
                 "re=%s" % g.pick(["4", "0", "1e-300", str(g.real(4.0, 2.0))]), "a=1.2"]
        argv += g.pick([["--mu", "7"], ["--mu", g.pick(["0", "-1", "inf", "1e400", "x"])], ["-i", "7Li133Cs"],
                        ["-i", "Zz"], []])
        if g.chance(0.4):
            argv += ["-J", g.pick(["0", "0-5", "5-1", "0-10000000", "99999999999", "a", "1,2,3", "-1"])]
        if g.chance(0.4):
            argv += ["-v", g.pick(["0", "0-3", "99999999999999999999", "x", "2,1"])]
        if g.chance(0.2):
            argv += ["--method", g.pick(["exact", "wkb", "bad"])]
    elif sub in ("check", "fit"):
        tmp = tempfile.mkdtemp()
        path = os.path.join(tmp, "d.csv")
        with open(path, "w") as fh:
            fh.write(g.pick(["v,energy,uncertainty\n0,100,0.1\n1,300,0.1\n2,490,0.1\n",
                             "\ufeffv,energy,uncertainty\n0,100,0.1\n", "v;energy\n", "", "x\n1\n"]))
        argv += [path]
        if sub == "fit":
            argv += ["morse", "De=5000", "re=3", "a=1", "--mu", "5", "-o", os.path.join(
                tmp, g.pick(["out.json", "missing/out.json"]))]
    stderr = io.StringIO()
    saved = sys.stderr
    sys.stderr = stderr
    try:
        status = cli.main(argv, out=io.StringIO())
    finally:
        sys.stderr = saved
    if status not in (0, 1, 2):
        raise AssertionError("exit status %r" % (status,))
    if "Traceback" in stderr.getvalue():
        raise AssertionError("traceback printed")


CASES = [(case_potential, 3.0), (case_levels, 4.0), (case_exact, 0.8), (case_wavefunction, 0.3),
         (case_compare, 0.2), (case_masses, 1.5), (case_read_levels, 1.0), (case_fit, 0.7), (case_result, 0.8),
         (case_rkr, 1.0), (case_cli, 0.6)]


def pick_case(rng):
    import numpy as np
    w = np.array([c[1] for c in CASES])
    return CASES[int(rng.choice(len(CASES), p=w / w.sum()))][0]


def classify(exc):
    """'clear' or 'unclear' for an exception raised by a call."""
    if not isinstance(exc, (ValueError, TypeError)):
        return "unclear"
    message = str(exc)
    if len(message) < 12 or any(p.lower() in message.lower() for p in INTERNAL_PHRASES):
        return "unclear"
    return "clear"


def _planned(index):
    """Self-test of the watchdog: WKBFIT_FUZZ_PLAN names a file with one outcome per case to stage."""
    plan = open(os.environ["WKBFIT_FUZZ_PLAN"]).read().split()
    what = plan[index % len(plan)]
    if what == "hang":
        time.sleep(3600)
    if what == "crash":
        os.abort()
    return "ok", "planned"


def run_case(seed, index):
    """(outcome, detail) of case `index`."""
    if os.environ.get("WKBFIT_FUZZ_PLAN"):
        return _planned(index)
    import numpy as np
    rng = np.random.default_rng([seed, index])
    func = pick_case(rng)
    g = Gen(rng)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            np.seterr(all="ignore")
            func(g)
    except NonFinite as exc:
        return "nonfinite", "%s: %s" % (func.__name__, exc)
    except (ValueError, TypeError) as exc:
        kind = classify(exc)
        return kind, "%s: %s: %s" % (func.__name__, type(exc).__name__, str(exc)[:300])
    except (Exception, SystemExit) as exc:
        if os.environ.get("WKBFIT_FUZZ_TRACE"):
            traceback.print_exc(file=sys.stdout)
        tb = traceback.extract_tb(exc.__traceback__)[-1]
        return "unclear", "%s: %s: %s (at %s:%d)" % (func.__name__, type(exc).__name__, str(exc)[:300],
                                                      os.path.basename(tb.filename), tb.lineno)
    return "ok", func.__name__


def worker(seed, start, count):
    sys.path.insert(0, PKG)
    import wkbfit  # noqa: F401  (import before the first START, so the import is not timed as a call)
    for i in range(start, start + count):
        print("START %d" % i, flush=True)
        outcome, detail = run_case(seed, i)
        print("DONE %d %s %s" % (i, outcome, json.dumps(detail)), flush=True)


def run(seed, count, timeout=30.0, start=0, log=None):
    """Runs cases start .. start+count-1 under a watchdog; returns {outcome: [(index, detail)]}."""
    results = {k: [] for k in OUTCOMES}
    i = start
    end = start + count
    while i < end:
        errors = tempfile.TemporaryFile()  # a file, not a pipe: a chatty worker cannot block on it
        proc = subprocess.Popen([sys.executable, os.path.abspath(__file__), "--worker", "--seed", str(seed),
                                 "--start", str(i), "--count", str(end - i)],
                                stdout=subprocess.PIPE, stderr=errors)
        current, last = None, time.monotonic()
        startup = 60.0  # the first import of the extension and NumPy
        pending = []  # complete lines read from the pipe but not yet handled
        buf = b""
        fd = proc.stdout.fileno()
        while True:
            limit = timeout if current is not None else startup
            if not pending:
                ready, _, _ = select.select([fd], [], [], max(0.0, limit - (time.monotonic() - last)))
                if ready:
                    chunk = os.read(fd, 65536)
                    if chunk:
                        buf += chunk
                        *done_lines, buf = buf.split(b"\n")
                        pending.extend(x.decode() + "\n" for x in done_lines)
                        if not done_lines:
                            continue
                    else:
                        pending.append("")  # end of file
            if not pending:
                if time.monotonic() - last < limit:
                    continue
                proc.kill()
                proc.wait()
                if current is None:
                    raise RuntimeError("the fuzz worker did not start: %s" % _tail(errors))
                results["hang"].append((current, "no answer within %.0f s" % timeout))
                if log is not None:
                    print("case %d: hang (no answer within %.0f s)" % (current, timeout), file=log, flush=True)
                i = current + 1
                break
            line = pending.pop(0)
            if not line:
                rc = proc.wait()
                err = _tail(errors)
                if current is not None:
                    results["crash"].append((current, "worker died with status %s: %s" % (rc, err[-500:])))
                    if log is not None:
                        print("case %d: crash (status %s)" % (current, rc), file=log, flush=True)
                    i = current + 1
                elif rc != 0:
                    raise RuntimeError("the fuzz worker failed: %s" % err[-2000:])
                else:
                    i = end
                break
            last = time.monotonic()
            if line.startswith("START "):
                current = int(line.split()[1])
            elif line.startswith("DONE "):
                _, idx, outcome, detail = line.rstrip("\n").split(" ", 3)
                results[outcome].append((int(idx), json.loads(detail)))
                if log is not None and outcome not in ("ok", "clear"):
                    print("case %s: %s %s" % (idx, outcome, json.loads(detail)), file=log, flush=True)
                current = None
                if int(idx) == end - 1:
                    proc.wait()
                    i = end
                    break
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    return results


def _tail(handle, n=2000):
    handle.seek(0)
    return handle.read().decode(errors="replace")[-n:]


def summary(results, seconds=None):
    n = sum(len(v) for v in results.values())
    text = "%d calls: %s" % (n, ", ".join("%s %d" % (k, len(results[k])) for k in OUTCOMES))
    return text + (" (%.1f s)" % seconds if seconds is not None else "")


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seed", type=int, default=12)
    ap.add_argument("--start", type=int, default=0)
    ap.add_argument("--count", type=int, default=2000)
    ap.add_argument("--timeout", type=float, default=30.0, help="seconds per call before it counts as a hang")
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--show", action="store_true", help="print every outcome, not only the failures")
    a = ap.parse_args()
    if a.worker:
        worker(a.seed, a.start, a.count)
        return 0
    t0 = time.monotonic()
    results = run(a.seed, a.count, a.timeout, a.start, log=sys.stdout)
    if a.show:
        for k in OUTCOMES:
            for idx, detail in results[k]:
                print(idx, k, detail)
    print(summary(results, time.monotonic() - t0))
    bad = sum(len(results[k]) for k in ("unclear", "nonfinite", "crash", "hang"))
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
