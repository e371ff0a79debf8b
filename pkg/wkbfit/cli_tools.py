"""Command-line subcommands beyond levels/check/fit/demo (registered by cli._parser):

    wkbfit rkr --G Y10,Y20,... --B Y01,Y11,... (--mu MU | -i LABEL) [-v V] [--output-dir DIR]
        RKR turning points from Dunham-type constants; writes the turning points and the curve (r, V)
    wkbfit compare (MODEL NAME=VALUE ... | --curve FILE) (--mu MU | -i LABEL) [--order 1|2|both] [--uncertainty U]
                [--quasibound]
        WKB against exact levels, level by level (and quasibound positions and widths)
    wkbfit curve FILE (--mu MU | -i LABEL) [--method wkb|exact] [--order 1|2] [--asymptote D] [--tail-power n]
                [--quasibound]
        levels of a curve given at points (columns r [A], V [cm-1])
    wkbfit predict FIT.json [-i LABEL | --mu MU] [-J J] [--near N] [--order 1|2] [--ends matched|maslov]
        predicted levels from a saved fit result

Units: energies cm-1, distances angstrom, masses u.
"""
import math
import os
import re

import numpy as np

__all__ = ["add_subcommands", "read_curve_file", "SIGMA_LIMIT"]

#: a fit that converges with sqrt(chi2/dof) above this is reported as failed (exit status 3): the residuals
#: are then on average more than 3 times the stated uncertainties, far outside what noise of the stated size
#: gives (for 5 or more degrees of freedom, P(chi2/dof > 9) < 1e-7)
SIGMA_LIMIT = 3.0
EXIT_POOR_FIT = 3


def _user_error(message):
    from .cli import UserError
    return UserError(message)


# -- shared argument helpers -----------------------------------------------------------------
def _coefficient_list(text, what):
    from .cli import _number
    return [_number(part, what) for part in text.split(",") if part.strip()]


def _mass(args):
    if args.mu is not None and args.isotopologue is not None:
        raise _user_error("give either --mu or --isotopologue, not both")
    if args.mu is None and args.isotopologue is None:
        raise _user_error("give the reduced mass: --mu MU (in u) or --isotopologue LABEL (such as 7Li133Cs)")
    return args.mu if args.mu is not None else args.isotopologue


def _output_path(args, name):
    directory = args.output_dir or "."
    if not os.path.isdir(directory):
        try:
            os.makedirs(directory, exist_ok=True)
        except OSError as err:
            raise _user_error("--output-dir %r cannot be created: %s" % (directory, err.strerror or err)) from None
    return os.path.join(directory, name)


def _write_text(path, text):
    from .reports import _atomic_write
    _atomic_write(path, text)


def _mass_options(p):
    from .cli import _number
    p.add_argument("--mu", type=lambda s: _number(s, "--mu"), help="reduced mass in u")
    p.add_argument("--isotopologue", "-i", metavar="LABEL",
                   help="isotopologue label such as 7Li133Cs (masses from the mass table)")


def _order_option(p, both=False, predict=False):
    choices = ("1", "2", "both") if both else ("1", "2")
    p.add_argument("--order", choices=choices, default="both" if both else None,
                   help="WKB order: 1 (the textbook first-order rule, fixed end phases), 2 (with the second-order "
                        "term; %s)%s" % (
                            "with matched end phases unless --ends maslov; default: the fit's own levels, exact "
                            "unless the fit's method was wkb" if predict else "default: with matched end phases",
                            ", or both (default)" if both else ""))
    p.add_argument("--ends", choices=("matched", "maslov"), default=None,
                   help="end phases of second-order levels: matched (default; right up to dissociation) or maslov "
                        "(fixed phases)")


def _rule_options(args, order):
    """levels() keywords for one --order value (None: the default rule) and --ends."""
    kw = {} if order is None else {"order": int(order)}
    if args.ends is not None:
        if order is not None and int(order) == 1:
            raise _user_error("--ends applies to --order 2 only (first order has fixed end phases)")
        kw["ends"] = args.ends
    return kw


def _fit_order_options(p):
    """--order and --ends of 'fit' and 'demo': the level rule of the fit and of its predicted levels."""
    p.add_argument("--order", choices=("1", "2"), default=None,
                   help="WKB order of the levels, as in 'wkbfit levels': 1 fits and predicts with first-order WKB "
                        "levels (the textbook rule, fixed end phases; the same as --method wkb); 2 keeps the fit's "
                        "--method (corrected by default, exact-level quality, more accurate than any WKB order) "
                        "and prints the predicted levels of the fitted potential by the second-order rule "
                        "(default: the fit's own levels)")
    p.add_argument("--ends", choices=("matched", "maslov"), default=None,
                   help="end phases of second-order predicted levels: matched (default with --order 2; right up to "
                        "dissociation) or maslov (fixed phases)")


def fit_rule(args):
    """(fit method, predict() keywords) from --method, --order and --ends of 'fit' or 'demo'.

    --order 1 is the first-order WKB fit (method "wkb", whose own predicted levels are first order);
    --order 2 keeps the method and asks the predictions for the second-order rule; the fit engine
    itself iterates on first-order WKB or exact-quality levels only."""
    order, ends, method = args.order, args.ends, args.method
    if order is None:
        if ends is not None:
            raise _user_error("--ends %s needs --order 2 (the end phases of second-order levels)" % ends)
        return method or "corrected", {}
    if order == "1":
        if ends is not None:
            raise _user_error("--ends applies to --order 2 only (first order has fixed end phases)")
        if method not in (None, "wkb"):
            raise _user_error("--order 1 is the first-order WKB fit (--method wkb); it contradicts --method %s: "
                              "drop one of them" % method)
        return "wkb", {}
    if method == "wkb":
        raise _user_error("--order 2 with --method wkb: the fit iterates on first-order WKB levels only; use "
                          "--order 1 for a first-order fit, or --method corrected (the default, exact-level "
                          "quality) with --order 2 for second-order predicted levels")
    return method or "corrected", {"order": 2, "ends": ends or "matched"}


def _quasibound_option(p):
    p.add_argument("--quasibound", action="store_true",
                   help="also list the quasibound levels (shape resonances between the asymptote and the top of the "
                        "centrifugal barrier, J > 0), with their width (FWHM, cm-1) and barrier penetration "
                        "integral theta")


def _output_dir_option(p):
    p.add_argument("--output-dir", metavar="DIR", default=None,
                   help="directory for the files written (created if missing; default: the current directory)")


# -- point-wise curve files ------------------------------------------------------------------
def read_curve_file(path):
    """(r, V) from a text file of two columns, r in angstrom and V in cm-1.

    Columns are separated by commas or white space; lines starting with '#' and blank lines are
    skipped; one header line of names (such as 'r,V') may come first.
    """
    try:
        with open(path, encoding="utf-8") as fh:
            lines = fh.readlines()
    except OSError as err:
        raise ValueError("cannot read curve file %r: %s" % (os.fspath(path), err.strerror or err)) from None
    r, V = [], []
    header_seen = False
    for k, line in enumerate(lines, 1):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        fields = [f for f in re.split(r"[,\s]+", text) if f]
        try:
            values = [float(f) for f in fields]
        except ValueError:
            if not r and not header_seen:
                header_seen = True
                continue
            raise ValueError("%s line %d: %r is not two numbers (r in angstrom, V in cm-1)" % (path, k, text)) \
                from None
        if len(values) != 2:
            raise ValueError("%s line %d: expected two columns (r in angstrom, V in cm-1), found %d"
                             % (path, k, len(values)))
        if not all(math.isfinite(x) for x in values):
            raise ValueError("%s line %d: %r is not finite" % (path, k, text))
        r.append(values[0])
        V.append(values[1])
    if not r:
        raise ValueError("curve file %s holds no points (two columns: r in angstrom, V in cm-1)" % path)
    return np.array(r), np.array(V)


def _curve_potential(path, args):
    from .potentials import PointwisePotential
    r, V = read_curve_file(path)
    options = {"asymptote": args.asymptote, "tail_power": args.tail_power}
    if getattr(args, "inner_wall", None) is not None:
        options["inner_wall"] = args.inner_wall
    return PointwisePotential(r, V, **options)


def _curve_options(p):
    from .cli import _number
    p.add_argument("--asymptote", type=lambda s: _number(s, "--asymptote"), default=None,
                   help="dissociation limit in cm-1, in the file's energy zero (default: fitted to the last points)")
    p.add_argument("--tail-power", type=lambda s: _number(s, "--tail-power"), default=None,
                   help="power n of the long-range tail D - C_n/r^n (default: fitted to the last points)")
    p.add_argument("--inner-wall", choices=_inner_wall_choices(), default=None,
                   help="formula continuing the curve inside its first point (default: exponential)")


def _inner_wall_choices():
    from .potentials import PointwisePotential
    return tuple(getattr(PointwisePotential, "INNER_WALLS", ("exponential",)))


# -- rkr -------------------------------------------------------------------------------------
def _cmd_rkr(args, out):
    from .cli import _int_list
    from .reports import text_table
    from .rkr import rkr_potential, rkr_turning_points
    G = _coefficient_list(args.G, "--G")
    B = _coefficient_list(args.B, "--B")
    if not G or not B:
        raise _user_error("give --G Y10,Y20,... and --B Y01,Y11,... (cm-1)")
    mu = _mass(args)
    if args.v is not None:
        vs = np.array([float(x) for x in _int_list(args.v, "-v")])
    else:
        vs = None
    curve = rkr_potential(G, B, mu, v=None if vs is None else _curve_quantum_numbers(vs),
                          asymptote=args.asymptote, tail_power=args.tail_power)
    if vs is None:  # the integer v up to the top of the default curve
        from .rkr import _default_quantum_numbers
        vs = np.arange(0, int(round(_default_quantum_numbers(np.array(G))[-1])) + 1, dtype=float)
    shown = vs
    tp = rkr_turning_points(G, B, mu, shown)
    print(tp.to_text(), file=out)
    tp_path = _output_path(args, args.prefix + "-turning-points.csv")
    curve_path = _output_path(args, args.prefix + "-curve.csv")
    _write_text(tp_path, "# RKR turning points; mu = %.10g u; re = %.10f A\n# units: v -, G cm-1, r A, f A, "
                         "g 1/A, error A\n" % (tp.mu, tp.re) +
                "v,G,r_inner,r_outer,f,g,error\n" + "".join(
                    "%.6f,%.10f,%.12f,%.12f,%.12f,%.12f,%.3e\n" % row for row in zip(
                        tp.v, tp.energy, tp.inner_turning_point, tp.outer_turning_point, tp.f, tp.g, tp.error)))
    _write_text(curve_path, "# RKR curve points (inner turning points, minimum, outer turning points); "
                            "read it with 'wkbfit curve'\n# units: r A, V cm-1 above the minimum\n# tail beyond "
                            "the last point: D = %.10g cm-1, n = %.6g\nr,V\n" % (curve.tail["asymptote"],
                                                                             curve.tail["tail_power"]) +
                "".join("%.12f,%.10f\n" % (r, V) for r, V in zip(curve.r, curve.V)))
    print("", file=out)
    print(text_table([("file", "", [tp_path, curve_path], "%s"),
                      ("holds", "", ["turning points (%d v)" % len(tp), "curve points (%d)" % len(curve.r)], "%s")]),
          file=out)
    print("levels of this curve: wkbfit curve %s %s --asymptote %.10g --tail-power %.6g" % (
        curve_path, "--mu %.10g" % tp.mu if args.mu is not None else "-i %s" % args.isotopologue,
        curve.tail["asymptote"], curve.tail["tail_power"]), file=out)
    return 0


def _curve_quantum_numbers(vs):
    """Integer v of the user plus fractional v near the minimum, where r - re grows like sqrt(v + 1/2)."""
    top = float(np.max(vs))
    s = np.linspace(0.0, math.sqrt(top + 0.5), 8 * (int(top) + 1) + 1)[1:]
    return np.unique(np.round(np.concatenate([s * s - 0.5, vs]), 9))  # rounded: no near-duplicate points


# -- compare ---------------------------------------------------------------------------------
def _potential_from_args(args):
    from .cli import _build_potential
    if args.curve is not None:
        if args.model is not None or args.params:
            raise _user_error("give either a model with parameters or --curve FILE, not both")
        return _curve_potential(args.curve, args)
    if args.model is None:
        raise _user_error("give a potential: a model with NAME=VALUE parameters, or --curve FILE")
    return _build_potential(args.model, args.params)


def _cmd_compare(args, out):
    from .cli import _int_list
    from .exact import compare_wkb_exact
    pot = _potential_from_args(args)
    mu = _mass(args)
    Js = _int_list(args.J, "-J")
    vs = None if args.v is None else _int_list(args.v, "-v")
    orders = ("1", "2") if args.order == "both" else (args.order,)
    for k, order in enumerate(orders):
        if args.ends is not None and order == "1" and len(orders) > 1:
            rule = {"order": 1}
        else:
            rule = _rule_options(args, order)
        comp = compare_wkb_exact(pot, mu, J=Js if len(Js) > 1 else Js[0], v=vs, **rule)
        if k:
            print("", file=out)
        print(comp.to_text(uncertainty=args.uncertainty), file=out)
    if args.quasibound:
        print("", file=out)
        print(_quasibound_comparison_text(pot, mu, Js, vs), file=out)
    return 0


def _quasibound_comparison_text(pot, mu, Js, vs):
    """The quasibound levels, semiclassical (the default rule) against the exact poles."""
    from .quasibound import compare_quasibound
    from .reports import text_table
    c, notes = compare_quasibound(pot, mu, Js, vs)
    columns = [("v", "", c["v"], "%d"), ("J", "", c["J"], "%d"), ("theta", "", c["theta"], "%.4f"),
               ("E_wkb", "cm-1", c["wkb_energy"], "%.6f"), ("E_exact", "cm-1", c["exact_energy"], "%.6f"),
               ("wkb-exact", "cm-1", c["difference"], "%.2e"), ("exact_error", "cm-1", c["exact_error"], "%.1e"),
               ("width_wkb", "cm-1", c["wkb_width"], "%.4e"), ("width_exact", "cm-1", c["exact_width"], "%.4e"),
               ("width_ratio", "", c["width_ratio"], "%.4f")]
    if not len(c["v"]):
        notes = ["no level is quasibound in both calculations at J = %s" % ", ".join(map(str, Js))] + notes
    return text_table(columns, "Quasibound levels of %r, mu = %.10g u: semiclassical against exact "
                      "(complex-energy poles)" % (pot, mu), notes)


# -- curve -----------------------------------------------------------------------------------
def _cmd_curve(args, out):
    from .cli import _int_list
    from .levels import levels
    pot = _curve_potential(args.curvefile, args)
    mu = _mass(args)
    Js = _int_list(args.J, "-J")
    vs = None if args.v is None else _int_list(args.v, "-v")
    if args.method == "exact" and (args.order is not None or args.ends is not None):
        raise _user_error("--order and --ends apply to --method wkb only")
    kwargs = _rule_options(args, args.order) if args.method == "wkb" else {}
    if args.quasibound:
        kwargs["quasibound"] = True
    table = levels(pot, mu, v=vs, J=Js if len(Js) > 1 else Js[0], method=args.method, **kwargs)
    print(repr(pot), file=out)
    print(table.to_text(), file=out)
    return 0


# -- predict ---------------------------------------------------------------------------------
def _cmd_predict(args, out):
    from .fitting import FitResult
    result = FitResult.load_json(args.fitfile)
    if args.mu is not None and args.isotopologue is not None:
        raise _user_error("give either --mu or --isotopologue, not both")
    labels = [args.isotopologue] if args.isotopologue is not None else (
        [None] if args.mu is not None else list(result.masses))
    for k, label in enumerate(labels):
        if k:
            print("", file=out)
        rule = _rule_options(args, args.order)
        if args.mu is not None:
            pred = result.predict(mu=args.mu, J=args.J, **rule)
        elif label is None:
            pred = result.predict(J=args.J, **rule)
        else:
            pred = result.predict(isotopologue=label, J=args.J, **rule)
        print(pred.to_text(last=args.near), file=out)
    return 0


# -- the poor-fit check used by 'wkbfit fit' --------------------------------------------------
def poor_fit_message(result, limit=SIGMA_LIMIT):
    """A message when a converged fit has sqrt(chi2/dof) above limit, else None."""
    s = result.sqrt_reduced_chi_square
    if result.success and s is not None and s > limit:
        return ("the fit converged, but its sqrt of reduced chi-square is %.3g, above the limit %g: the residuals are "
                "%.3g times the stated uncertainties on average, so the model does not describe the data (or the "
                "uncertainties are understated); the parameters and predictions are not trustworthy (raise the "
                "limit with --sigma-limit to accept it)" % (s, limit, s))
    return None


# -- registration ----------------------------------------------------------------------------
def add_subcommands(sub, models_help, model_names):
    """Add rkr, compare, curve and predict to the subparsers `sub` of the wkbfit parser."""
    from .cli import _number, _positive_int

    p = sub.add_parser("rkr", help="RKR turning points and curve from Dunham-type constants",
                       description="First-order RKR turning points from G(v) = Y10 (v+1/2) + Y20 (v+1/2)^2 + ... "
                                   "and B(v) = Y01 + Y11 (v+1/2) + ... (cm-1). Prints the turning points at the "
                                   "integer v asked for and writes two CSV files: the turning points, and the "
                                   "curve points (r in angstrom, V in cm-1 above the minimum) that 'wkbfit curve' "
                                   "reads.")
    p.add_argument("--G", required=True, metavar="Y10,Y20,...", help="vibrational constants Y10, Y20, ... in cm-1")
    p.add_argument("--B", required=True, metavar="Y01,Y11,...", help="rotational constants Y01, Y11, ... in cm-1")
    _mass_options(p)
    p.add_argument("-v", default=None, help="vibrational levels: 0-10 or 0,1,5 (default: up to the last v "
                                            "below the maximum of G(v); give the range of the data)")
    p.add_argument("--asymptote", type=lambda s: _number(s, "--asymptote"), default=None,
                   help="dissociation limit in cm-1 above the minimum for the curve's tail")
    p.add_argument("--tail-power", type=lambda s: _number(s, "--tail-power"), default=None,
                   help="power n of the curve's tail D - C_n/r^n")
    p.add_argument("--prefix", default="rkr", help="file name prefix (default rkr: rkr-turning-points.csv, "
                                                   "rkr-curve.csv)")
    _output_dir_option(p)
    p.set_defaults(run=_cmd_rkr)

    p = sub.add_parser("compare", help="WKB against exact levels, level by level",
                       description="Semiclassical (WKB, first and/or second order) against exact levels of the "
                                   "radial Schroedinger equation, level by level, optionally against a data "
                                   "uncertainty. Models and parameters: " + models_help + ".")
    p.add_argument("model", nargs="?", default=None, help="potential model: " + ", ".join(model_names))
    p.add_argument("params", nargs="*", metavar="NAME=VALUE", help="model parameters")
    p.add_argument("--curve", metavar="FILE", default=None,
                   help="a curve given at points instead of a model (columns r [A], V [cm-1])")
    _curve_options(p)
    _mass_options(p)
    p.add_argument("-J", default="0", help="rotational quantum number(s) (default 0)")
    p.add_argument("-v", default=None, help="vibrational level(s) (default: every level bound in both)")
    _order_option(p, both=True)
    p.add_argument("--uncertainty", type=lambda s: _number(s, "--uncertainty"), default=None,
                   help="a data uncertainty in cm-1: a last column says whether WKB is within it")
    p.add_argument("--quasibound", action="store_true",
                   help="also compare the quasibound levels (shape resonances between the asymptote and the top of "
                        "the centrifugal barrier, J > 0): semiclassical against exact positions and widths")
    p.set_defaults(run=_cmd_compare)

    p = sub.add_parser("curve", help="levels of a curve given at points",
                       description="Levels of a potential curve given at points: a file of two columns, r in "
                                   "angstrom and V in cm-1 (commas or spaces; '#' comments; an optional header). "
                                   "Between the points a cubic spline; inside the first point an inner-wall "
                                   "formula and beyond the last a tail D - C_n/r^n continue the curve (levels "
                                   "that reach there are reported).")
    p.add_argument("curvefile", help="the curve file")
    _curve_options(p)
    _mass_options(p)
    p.add_argument("-J", default="0", help="rotational quantum number(s) (default 0)")
    p.add_argument("-v", default=None, help="vibrational level(s) (default: every bound level)")
    p.add_argument("--method", choices=("wkb", "exact"), default="wkb", help="level calculation (default wkb)")
    _order_option(p)
    _quasibound_option(p)
    p.set_defaults(run=_cmd_curve)

    p = sub.add_parser("predict", help="predicted levels from a saved fit result",
                       description="Predicted bound levels with one-sigma uncertainties from a fit result saved "
                                   "as JSON by 'wkbfit fit' (every isotopologue of the fit, or one given).")
    p.add_argument("fitfile", help="the JSON file written by 'wkbfit fit'")
    _mass_options(p)
    p.add_argument("-J", type=int, default=0, help="rotational quantum number (default 0)")
    p.add_argument("--near", type=_positive_int, default=None, metavar="N",
                   help="print only the N levels nearest dissociation (default: all)")
    _order_option(p, predict=True)
    p.set_defaults(run=_cmd_predict)
