"""The wkbfit command line.

    wkbfit levels MODEL NAME=VALUE ... (--mu MU | --isotopologue LABEL) [-J J] [-v V] [--method wkb|exact]
                [--order 1|2] [--ends matched|maslov] [--quasibound]
    wkbfit check DATAFILE [--energy-zero ZERO]
    wkbfit fit DATAFILE MODEL NAME=VALUE ... [--mu MU | --mass LABEL=MU ...] [--fix NAME] [--vary NAME] [-o JSON]
                [--order 1|2 [--ends matched|maslov]]
                [--replicas N [--replica-refit linearised|full] [--scheduler ADDRESS]]
    wkbfit demo [--method M] [--order 1|2 [--ends matched|maslov]]
    wkbfit rkr | compare | curve | predict   (see wkbfit.cli_tools)

User errors (bad numbers, unreadable files, unknown names) print one line to stderr and exit with status 2
(set WKBFIT_DEBUG=1 to see the traceback instead); a fit that converges to a sqrt of reduced chi-square
above --sigma-limit (default 3) exits with status 3.
"""
import argparse
import importlib.util
import inspect
import math
import os
import re
import sys
import warnings

import numpy as np

from . import _validate
from . import cli_tools
from . import potentials as _potentials

__all__ = ["main", "MODELS"]

EXIT_USAGE = 2


class UserError(Exception):
    """A mistake in the command line or the data: reported in one line, exit status 2."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        command = self.prog.split(" ", 1)[1] + ": " if " " in self.prog else ""
        raise UserError("%s%s (see '%s --help')" % (command, message, self.prog))


# -- potential models ---------------------------------------------------------------------
def _model_names():
    """Command-line name -> Potential subclass, for every model with adjustable parameters."""
    out = {}
    for cls in vars(_potentials).values():
        if (isinstance(cls, type) and issubclass(cls, _potentials.Potential) and cls.model
                and cls is not _potentials.PointwisePotential):
            name = re.sub(r"(?<=[a-z])(?=[A-Z])", "-", cls.__name__).lower()
            out[name] = cls
    return dict(sorted(out.items()))


MODELS = _model_names()


def _find_model(name):
    key = name.strip().lower().replace("_", "-")
    for cli_name, cls in MODELS.items():
        if key in (cli_name, cli_name.replace("-", ""), cls.model.replace("_", "-")):
            return cls
    raise UserError("unknown potential model %r; models: %s" % (name, ", ".join(MODELS)))


#: marks a constructor parameter without a default
REQUIRED = object()


def _model_signature(cls):
    """[(parameter name, default or REQUIRED)] of a model's constructor."""
    params = list(inspect.signature(cls.__init__).parameters.values())[1:]
    return [(p.name, REQUIRED if p.default is inspect.Parameter.empty else p.default) for p in params
            if p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY)]


def _number(text, what):
    try:
        x = float(text)
    except ValueError:
        raise UserError("%s=%r is not a number" % (what, text)) from None
    if not math.isfinite(x):
        raise UserError("%s=%r is not a finite number" % (what, text))
    return x


def _build_potential(model, assignments):
    cls = _find_model(model)
    signature = _model_signature(cls)
    names = [n for n, _ in signature]
    values = {}
    for item in assignments:
        if "=" not in item:
            raise UserError("parameter %r must be written NAME=VALUE (parameters of %s: %s)"
                            % (item, cls.__name__, ", ".join(names)))
        name, text = (s.strip() for s in item.split("=", 1))
        if name not in names:
            raise UserError("%s has no parameter %r; its parameters are %s" % (cls.__name__, name, ", ".join(names)))
        if name in values:
            raise UserError("parameter %s is given twice" % name)
        parts = text.split(",")
        default = dict(signature)[name]
        if isinstance(default, str) and text == default:  # a named default, such as the MLR r_ref=re
            values[name] = text
            continue
        values[name] = (_number(parts[0], name) if len(parts) == 1
                        else [_number(p, name) for p in parts])
    missing = [n for n, default in signature if default is REQUIRED and n not in values]
    if missing:
        raise UserError("%s needs %s; write them as NAME=VALUE, for example %s" % (
            cls.__name__, ", ".join(missing), " ".join("%s=..." % n for n in missing)))
    return cls(**values)


def _positive_int(text):
    if not re.fullmatch(r"\s*\d+\s*", text) or int(text) < 1:
        raise argparse.ArgumentTypeError("%r is not a whole number >= 1" % text)
    return int(text)


def _int_list(text, what, limit=_validate.MAX_J_VALUES):
    """'3', '0,2,5' or '0-10' (inclusive) -> list of ints >= 0, at most `limit` of them (a work limit
    checked before a range is expanded) and each at most MAX_QUANTUM_NUMBER."""
    out = []
    top = _validate.MAX_QUANTUM_NUMBER
    for part in text.split(","):
        part = part.strip()
        m = re.fullmatch(r"(\d+)\s*-\s*(\d+)", part)
        for number in (m.groups() if m else [part] if re.fullmatch(r"\d+", part) else []):
            if int(number) > top:
                raise UserError("%s=%s: quantum numbers above %d are not accepted" % (what, number, top))
        if m:
            lo, hi = int(m.group(1)), int(m.group(2))
            if hi < lo:
                raise UserError("%s range %r is empty" % (what, part))
            if len(out) + hi - lo + 1 > limit:
                raise UserError("%s %s asks for %d values, more than the limit of %d per call: give a shorter "
                                "range" % (what, text, len(out) + hi - lo + 1, limit))
            out.extend(range(lo, hi + 1))
        elif re.fullmatch(r"\d+", part):
            out.append(int(part))
        else:
            raise UserError("%s=%r: write a non-negative integer, a list such as 0,2,5 or a range such as 0-10"
                            % (what, text))
    return out


def _mass_map(items):
    """['LABEL=MU', ...] -> {label: reduced mass in u}."""
    out = {}
    for item in items or ():
        if "=" not in item:
            raise UserError("--mass %r must be written LABEL=MU (an isotopologue label and its reduced mass in u)"
                            % item)
        label, text = (s.strip() for s in item.split("=", 1))
        out[label] = _number(text, "--mass %s" % label)
    return out


# -- subcommands --------------------------------------------------------------------------
def _cmd_levels(args, out):
    from .levels import levels
    if args.method == "exact" and importlib.util.find_spec("wkbfit.exact") is None:
        raise UserError("--method exact needs the exact radial solver, which this build of wkbfit does not have")
    pot = _build_potential(args.model, args.params)
    if args.mu is not None and args.isotopologue is not None:
        raise UserError("give either --mu or --isotopologue, not both")
    if args.mu is None and args.isotopologue is None:
        raise UserError("give the reduced mass: --mu MU (in u) or --isotopologue LABEL (such as 7Li133Cs)")
    mu = args.mu if args.mu is not None else args.isotopologue
    Js = _int_list(args.J, "-J")
    vs = None if args.v is None else _int_list(args.v, "-v", _validate.MAX_LEVELS)
    rule = {}
    if args.method == "wkb":
        rule = dict(order=args.order, ends=args.ends, langer=args.langer)
    elif args.order is not None or args.ends is not None or args.langer:
        raise UserError("--order, --ends and --langer apply to --method wkb only")
    if args.quasibound:
        rule["quasibound"] = True
    table = levels(pot, mu, v=vs, J=Js if len(Js) > 1 else Js[0], method=args.method, **rule)
    if args.csv:
        cols = table.columns
        print(",".join(cols), file=out)
        for i in range(len(table)):
            print(",".join(repr(getattr(table, c)[i]) if c == "rule" else repr(getattr(table, c)[i].item())
                           for c in cols), file=out)
    else:
        if args.isotopologue is not None:
            print("isotopologue %s" % args.isotopologue, file=out)
        print(table.to_text(), file=out)
    return 0


def _cmd_check(args, out):
    from .observed import read_levels
    obs = read_levels(args.datafile, energy_zero=args.energy_zero, unit=args.unit)
    for line in obs.comments:
        print("# " + line, file=out)
    print(repr(obs), file=out)
    masses = obs.masses_by_isotopologue(_mu_argument(args, obs))
    from .reports import text_table
    labels = obs.isotopologues
    rows = [obs.rows_of(label) for label in labels]
    print(text_table([
        ("isotopologue", "", [label or "unnamed" for label in labels], "%s"),
        ("levels", "", [len(r) for r in rows], "%d"),
        ("v", "", ["%d..%d" % (obs.v[r].min(), obs.v[r].max()) for r in rows], "%s"),
        ("J", "", [",".join(str(j) for j in sorted(set(obs.J[r].tolist()))) for r in rows], "%s"),
        ("sigma min", "cm-1", [obs.uncertainty[r].min() for r in rows], "%.3g"),
        ("sigma max", "cm-1", [obs.uncertainty[r].max() for r in rows], "%.3g"),
        ("reduced mass", "u", [masses[label] for label in labels], "%.10g")]), file=out)
    return 0


def _mu_argument(args, obs):
    masses = _mass_map(args.mass)
    if args.mu is not None and masses:
        raise UserError("give either --mu (one isotopologue) or --mass LABEL=MU, not both")
    if args.mu is not None:
        return args.mu
    if masses:
        return masses
    return None


def _fit_kwargs(args, pot):
    names = list(pot.param_names)
    for name in (args.fix or []) + (args.vary or []):
        if name not in names:
            raise UserError("%s has no parameter %r; its parameters are %s" % (type(pot).__name__, name,
                                                                                  ", ".join(names)))
    both = set(args.fix or []) & set(args.vary or [])
    if both:
        raise UserError("parameter %s is both fixed and varied" % ", ".join(sorted(both)))
    method, _ = cli_tools.fit_rule(args)
    kwargs = {"method": method}
    if args.fix or args.vary:
        vary = {n: (n not in getattr(pot, "fixed_by_default", ())) for n in names}
        vary.update({n: False for n in args.fix or []})
        vary.update({n: True for n in args.vary or []})
        kwargs["vary"] = vary
    if args.scale_uncertainties is not None:
        kwargs["scale_uncertainties"] = args.scale_uncertainties
    return kwargs


def _cmd_fit(args, out):
    from .fitting import fit
    from .observed import read_levels
    path = args.output or _default_json_path(args.datafile)
    if args.output_dir is not None:
        path = cli_tools._output_path(args, os.path.basename(path) if args.output is None else path)
    _refuse_overwrite(path, args.force)
    from .lines import read_lines
    obs = read_levels(args.datafile, energy_zero=args.energy_zero, unit=args.unit)
    pot = _build_potential(args.model, args.params)
    mu = _mu_argument(args, obs)
    data = [obs] + [read_lines(path, unit=args.unit) for path in args.lines or []]
    kwargs = _fit_kwargs(args, pot)
    if args.omega:
        kwargs["omega"] = args.omega
    _, rule = cli_tools.fit_rule(args)
    result = fit(pot, data if len(data) > 1 else obs, mu, **kwargs)
    print(result.report(), file=out)
    for label in obs.isotopologues:
        print("", file=out)
        pred = result.predict(isotopologue=label, **rule) if label is not None else result.predict(**rule)
        print(_format_prediction(pred, "isotopologue %s" % label if label else "the fitted reduced mass",
                                 args.near), file=out)
    for target in args.predict or []:
        print("", file=out)
        print(_prediction_text(result, target, args.near, rule), file=out)
    if args.replicas:
        print("", file=out)
        print(_replicas_text(result, args), file=out)
    result.save_json(path)
    print("\nfit result written to %s" % path, file=out)
    poor = cli_tools.poor_fit_message(result, args.sigma_limit)
    if poor:
        print("wkbfit: error: %s" % poor, file=sys.stderr)
        return cli_tools.EXIT_POOR_FIT
    return 0 if _fit_ok(result) else 1


def _refuse_overwrite(path, force):
    """An existing result is kept unless --force says otherwise (checked before the fit runs)."""
    if path and os.path.exists(path) and not force:
        raise UserError("%s exists already: give another name with -o, or --force to replace it" % path)


def _demo_near_dissociation(demo, obs, result, true):
    """The near-dissociation table of the demo: the precisely measured last levels of the first
    isotopologue, asymptote free and fixed at the fitted De, against the invented truth."""
    from .levels import levels
    from .near_dissociation import near_dissociation_fit
    label = next(iter(demo.DEMO_ISOTOPOLOGUES))
    near = demo.DEMO_ISOTOPOLOGUES[label]["near_threshold"]
    rows = [i for i in obs.rows_of(label) if obs.J[i] == 0 and obs.v[i] in near]
    mu = result.masses[label]
    lines = ["Near dissociation, %s J=0 (the %d levels v=%d-%d measured to %g cm-1; INVENTED state)" % (
        label, len(rows), min(near), max(near), demo.DEMO_NEAR_THRESHOLD_SIGMA)]
    against = []
    for asymptote in (None, result.potential.asymptote):
        fit_nd = near_dissociation_fit(obs.v[rows], obs.energy[rows], obs.uncertainty[rows], 6, asymptote, mu=mu,
                                       corrections=2)
        lines.append(fit_nd.table())
        D, C6 = fit_nd.D, fit_nd.C_n
        against.append("asymptote %s: D - De %s, C6 %+.1f %% (%+.1f sd)" % (
            "fitted" if asymptote is None else "fixed",
            "%+.4f cm-1 (%+.1f sd)" % (D[0] - true.De, (D[0] - true.De) / D[1]) if D[1] else "(fixed)",
            100 * (C6[0] / true.params["C6"] - 1), (C6[0] - true.params["C6"]) / C6[1]))
    pred = result.predict(isotopologue=label)
    lines.append("From the potential fit: De = %.4f +/- %.4f cm-1, D0 = %.4f +/- %.4f cm-1, v_th = %.4f +/- %.4f "
                 "(matched rule), vD = v_th + 1/8 = %.4f +/- %.4f (physics.md 4c), %d bound levels" % (
                     result.params["De"].value, result.params["De"].uncertainty, pred.D0, pred.D0_uncertainty,
                     pred.v_th, pred.v_th_uncertainty, pred.vD, pred.vD_uncertainty, pred.n_bound)
                 if pred.v_th is not None else
                 "From the potential fit: De = %.4f +/- %.4f cm-1, D0 = %.4f +/- %.4f cm-1, vD = %.4f +/- %.4f "
                 "(first-order WKB), %d bound levels" % (
                     result.params["De"].value, result.params["De"].uncertainty, pred.D0, pred.D0_uncertainty,
                     pred.vD, pred.vD_uncertainty, pred.n_bound))
    true_table = levels(true, mu)
    true_exact = levels(true, mu, method="exact")
    lines.append("The truth (known only because the data are invented): De = %.4f cm-1, C6 = %.6g cm-1 A^6, v_th = %.4f "
                 "(matched rule; vD = %.4f), %d bound exact levels" % (
                     true.De, true.params["C6"], true_table.v_th, true_table.v_th + 0.125, len(true_exact)))
    lines.append("Near-dissociation expansion against the truth: " + "; ".join(against) + ". Levels bound by up to "
                 "~100 cm-1 reach in to ~7 A, where this MLR's tail is not yet C6/r^6 alone: the expansion's few terms "
                 "absorb that, biasing C6; the potential fit, which uses the whole curve, does not.")
    return "\n".join(lines)


def _replicas_text(result, args):
    """The bootstrap or Monte-Carlo replicas of the fit (--replicas N [--scheduler ADDRESS])."""
    if not result.success:
        return "replicas skipped: the fit did not converge"
    executor = args.scheduler or ("serial" if args.threads == 1 else args.threads)
    try:
        reps = result.bootstrap(args.replicas, seed=args.seed, kind=args.replica_kind, executor=executor,
                                progress=False if args.no_progress else None, refit=args.replica_refit)
    except ImportError as err:
        raise UserError(str(err)) from None
    return reps.to_text()


def _default_json_path(datafile):
    stem = os.path.splitext(os.path.basename(os.fspath(datafile)))[0]
    return stem + "-fit.json"


def _fit_ok(result):
    return bool(result.success)


def _prediction_text(result, target, near, rule=None):
    """Predicted levels near dissociation for an isotopologue label or a reduced mass in u (rule: the
    predict() keywords order, ends of --order/--ends)."""
    rule = rule or {}
    try:
        mu = float(target)
    except ValueError:
        return _format_prediction(result.predict(isotopologue=target, **rule), "isotopologue %s" % target, near)
    return _format_prediction(result.predict(mu=mu, **rule), "reduced mass %.10g u" % mu, near)


def _format_prediction(pred, title, near):
    return "Predicted levels near dissociation, %s\n%s" % (title, pred.to_text(last=near))


def _cmd_demo(args, out):
    from . import demo
    from .fitting import fit
    from .levels import levels
    from .observed import read_levels
    _refuse_overwrite(args.output, args.force)
    obs = read_levels(demo.demo_data_path(), energy_zero="minimum")
    print("=" * 100, file=out)
    print(demo.DEMO_BANNER, file=out)
    print("=" * 100, file=out)
    for line in obs.comments:
        print("# " + line, file=out)
    print("", file=out)
    print("%r" % obs, file=out)
    start = demo.demo_start_potential()
    vary = {n: n in demo.DEMO_VARY for n in start.param_names}
    method, rule = cli_tools.fit_rule(args)
    print("\nFitting %s with %s varied, starting from %r (method %s%s)\n" % (
        type(start).__name__, ", ".join(demo.DEMO_VARY), start, method,
        "; predicted levels by the second-order rule, %s end phases" % rule["ends"] if rule else ""), file=out)
    result = fit(start, obs, None, method=method, vary=vary)
    print(result.report(), file=out)
    true = demo.demo_true_potential()
    for label in obs.isotopologues:
        pred = result.predict(isotopologue=label, **rule)
        print("", file=out)
        print(_format_prediction(pred, "isotopologue %s (INVENTED state)" % label, args.near), file=out)
        # the invented scenario knows its truth: compare the predictions with it (exact levels)
        true_energy = levels(true, result.masses[label], method="exact").energy
        n = min(len(true_energy), pred.n_bound)
        shown = slice(max(0, n - args.near), n)
        pulls = (true_energy[shown] - pred.energy[shown]) / pred.energy_uncertainty[shown]
        print("Against the generating potential (known only because the data are invented): %d bound levels "
              "(predicted %d), largest |true - predicted|/sigma over the levels shown %.2f" % (
                  len(true_energy), pred.n_bound, float(np.max(np.abs(pulls)))), file=out)
    print("", file=out)
    print(_demo_near_dissociation(demo, obs, result, true), file=out)
    print("", file=out)
    print("The generating ('true') potential of this invented data set was %r." % true, file=out)
    print("Fitted minus true, in standard deviations (known only because the data are invented): %s" % ", ".join(
        "%s %+.2f" % (n, (result.params[n].value - demo.DEMO_TRUE_VALUES[n]) / result.params[n].uncertainty)
        for n in demo.DEMO_VARY if result.params[n].uncertainty), file=out)
    print(demo.DEMO_BANNER, file=out)
    if args.output:
        result.save_json(args.output)
        print("fit result written to %s" % args.output, file=out)
    return 0 if _fit_ok(result) else 1


# -- parser -------------------------------------------------------------------------------
def _parser():
    models_help = ", ".join("%s (%s)" % (name, ", ".join(
        "%s%s" % (n, "" if d is REQUIRED else "=%g" % d if isinstance(d, (int, float)) else "=%s" % (d,))
        for n, d in _model_signature(cls)))
        for name, cls in MODELS.items())
    parser = _Parser(prog="wkbfit", description=(
        "WKB and exact levels of diatomic potentials, and weighted fits of potentials to measured levels. "
        "Units: energies cm-1, distances angstrom, masses u."),
        epilog="Run 'wkbfit COMMAND --help' for the options of a command. Exit status: 0 done, 1 a fit did not "
               "converge (its best point is still reported), 2 a mistake in the command or the data (one line on "
               "stderr; WKBFIT_DEBUG=1 shows the traceback), 3 a fit converged to a sqrt of reduced chi-square "
               "above --sigma-limit (default %g)." % cli_tools.SIGMA_LIMIT)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("levels", help="list the levels of a potential",
                       description="List the bound levels of a potential model as a text table. "
                                   "Models and parameters: " + models_help + ".")
    p.add_argument("model", help="potential model: " + ", ".join(MODELS))
    p.add_argument("params", nargs="*", metavar="NAME=VALUE",
                   help="model parameters, e.g. De=4000 re=4.0 a=1.2 (De in cm-1, re in angstrom)")
    p.add_argument("--mu", type=lambda s: _number(s, "--mu"), help="reduced mass in u")
    p.add_argument("--isotopologue", "-i", metavar="LABEL",
                   help="isotopologue label such as 7Li133Cs (masses from the mass table)")
    p.add_argument("-J", default="0", help="rotational quantum number(s): 0, a list 0,5,10 or a range 0-5 "
                                           "(default 0)")
    p.add_argument("-v", default=None, help="vibrational level(s) to list (default: every bound level)")
    p.add_argument("--method", choices=("wkb", "exact"), default="wkb",
                   help="wkb (semiclassical, default) or exact (radial Schroedinger equation)")
    p.add_argument("--order", type=int, choices=(1, 2), default=None,
                   help="WKB order: 2 (default) with the second-order term, 1 first order (with --ends maslov)")
    p.add_argument("--ends", choices=("matched", "maslov"), default=None,
                   help="WKB end phases: matched (default; right up to dissociation) or maslov (fixed phases)")
    p.add_argument("--langer", action="store_true",
                   help="use (J+1/2)^2 for the centrifugal term (WKB with fixed end phases only)")
    cli_tools._quasibound_option(p)
    p.add_argument("--csv", action="store_true", help="print comma-separated values instead of a table")
    p.set_defaults(run=_cmd_levels)

    def data_options(p):
        p.add_argument("datafile", help="CSV file with columns v, energy, uncertainty (cm-1, 1 sigma), "
                                        "optional J and isotopologue; lines starting with # are comments")
        p.add_argument("--energy-zero", choices=("minimum", "lowest", "asymptote"), default="minimum",
                       help="what the energies are measured from: minimum (term values above the potential "
                            "minimum, default), lowest (the lowest level of each isotopologue) or asymptote "
                            "(binding energies, positive)")
        p.add_argument("--unit", choices=("cm-1", "MHz", "GHz"), default=None,
                       help="unit of the energies and uncertainties (default cm-1, or what the file states)")
        p.add_argument("--mu", type=lambda s: _number(s, "--mu"),
                       help="reduced mass in u (data of one isotopologue)")
        p.add_argument("--mass", action="append", metavar="LABEL=MU",
                       help="reduced mass in u for one isotopologue label (repeat for several); labels without "
                            "one take their masses from the mass table")

    p = sub.add_parser("check", help="read and validate a levels file",
                       description="Read a levels file, report what it holds and the reduced masses, "
                                   "or say which row and column is wrong.")
    data_options(p)
    p.set_defaults(run=_cmd_check)

    p = sub.add_parser("fit", help="fit a potential to a levels file",
                       description="Fit a potential model to measured levels by weighted least squares, print the "
                                   "report and the predicted levels near dissociation, and write the full result "
                                   "as JSON. Models and parameters: "
                                   + models_help + ".")
    data_options(p)
    p.add_argument("model", help="potential model: " + ", ".join(MODELS))
    p.add_argument("params", nargs="*", metavar="NAME=VALUE", help="starting values of the model parameters")
    p.add_argument("--fix", action="append", metavar="NAME", help="keep this parameter at its starting value")
    p.add_argument("--vary", action="append", metavar="NAME",
                   help="vary this parameter (for one fixed by default, such as the Lennard-Jones n and m)")
    p.add_argument("--method", choices=("corrected", "wkb", "exact"), default=None,
                   help="level calculation: corrected (default: WKB with exact per-level corrections, exact-level "
                        "quality), wkb (first-order only, fast) or exact (every iteration exact)")
    cli_tools._fit_order_options(p)
    p.add_argument("--lines", action="append", metavar="FILE",
                   help="also fit the line positions in FILE (columns v_upper, J_upper, v_lower, J_lower, wavenumber, "
                        "uncertainty, optional isotopologue, upper_state, lower_state); repeat for several")
    p.add_argument("--omega", type=int, default=0, metavar="OMEGA",
                   help="electronic angular momentum of the state: centrifugal term J(J+1) - Omega^2")
    scale = p.add_mutually_exclusive_group()
    scale.add_argument("--scale-uncertainties", dest="scale_uncertainties", action="store_const", const=True,
                       default=None, help="scale parameter uncertainties by the sqrt of reduced chi-square")
    scale.add_argument("--no-scale-uncertainties", dest="scale_uncertainties", action="store_const", const=False,
                       help="take the data uncertainties as they are")
    p.add_argument("--predict", action="append", metavar="LABEL_OR_MU",
                   help="besides the isotopologues of the data, print the predicted levels for this isotopologue "
                        "label or reduced mass in u (repeat for several)")
    p.add_argument("--near", type=_positive_int, default=10, metavar="N",
                   help="number of levels nearest dissociation to print for each isotopologue (default 10)")
    p.add_argument("-o", "--output", metavar="JSON",
                   help="where to write the fit result (default: DATAFILE name with -fit.json, in the current "
                        "directory); an existing file is kept unless --force")
    p.add_argument("--force", action="store_true", help="replace an existing result file")
    p.add_argument("--output-dir", metavar="DIR", default=None,
                   help="directory for the fit result (created if missing)")
    p.add_argument("--sigma-limit", type=lambda s: _number(s, "--sigma-limit"), default=cli_tools.SIGMA_LIMIT,
                   metavar="S", help="a converged fit whose sqrt of reduced chi-square exceeds S is reported as "
                                     "failed, exit status 3 (default %g)" % cli_tools.SIGMA_LIMIT)
    replicas = p.add_argument_group("replicas (the spread of the parameters and predictions over refits)")
    replicas.add_argument("--replicas", type=_positive_int, default=0, metavar="N",
                          help="refit N Monte-Carlo or bootstrap replicas of the data and print their statistics")
    replicas.add_argument("--replica-kind", choices=("monte-carlo", "resample"), default="monte-carlo",
                          help="monte-carlo: calculated levels plus noise of the uncertainties (default); "
                               "resample: the levels drawn with replacement")
    replicas.add_argument("--replica-refit", choices=("linearised", "full"), default=None,
                          help="linearised: first-order refits with the fit's exact corrections, linear in the "
                               "parameters, checked at run time (default where the fit allows it); full: every "
                               "replica refitted like the fit itself")
    replicas.add_argument("--seed", type=int, default=1, help="seed of the replicas (default 1)")
    replicas.add_argument("--threads", type=_positive_int, default=None, metavar="N",
                          help="threads for the replicas (default: every core)")
    replicas.add_argument("--scheduler", metavar="ADDRESS",
                          help="run the replicas on this Dask scheduler (e.g. tcp://host:8786; needs the extra "
                               "wkbfit[dask])")
    replicas.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(run=_cmd_fit)

    p = sub.add_parser("demo", help="fit the shipped INVENTED demo data",
                       description="The main job on shipped demo data: read the INVENTED levels of an invented "
                                   "state of LiCs (two isotopologues), fit a Lennard-Jones potential, print the "
                                   "report and the predicted levels near dissociation. The data are made up, "
                                   "not measurements.")
    p.add_argument("--method", choices=("corrected", "wkb", "exact"), default=None,
                   help="level calculation: corrected (default: WKB with exact per-level corrections, exact-level "
                        "quality), wkb (first-order only, fast) or exact (every iteration exact)")
    cli_tools._fit_order_options(p)
    p.add_argument("--near", type=_positive_int, default=10, metavar="N",
                   help="number of levels nearest dissociation to print (default 10)")
    p.add_argument("-o", "--output", metavar="JSON", help="also write the fit result as JSON (an existing file is "
                                                          "kept unless --force)")
    p.add_argument("--force", action="store_true", help="replace an existing result file")
    p.set_defaults(run=_cmd_demo)
    cli_tools.add_subcommands(sub, models_help, list(MODELS))
    return parser


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print("wkbfit: warning: %s" % " ".join(str(message).split()), file=sys.stderr)


def main(argv=None, out=None):
    """Run the command line; returns the exit status (0 ok, 1 fit not converged, 2 user error)."""
    out = out or sys.stdout
    parser = _parser()
    try:
        try:
            args = parser.parse_args(argv)
        except SystemExit as done:  # --help
            return done.code if isinstance(done.code, int) else 0
        if args.command is None:
            parser.print_help(out)
            return EXIT_USAGE
        with warnings.catch_warnings(), _signals_exit():
            warnings.simplefilter("always")
            warnings.showwarning = _show_warning
            return args.run(args, out)
    except UserError as err:
        print("wkbfit: error: %s" % err, file=sys.stderr)
        return EXIT_USAGE
    except BrokenPipeError:
        # output piped into a reader that stopped early (e.g. `| head`): not an error of ours
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except (ValueError, OSError) as err:
        if os.environ.get("WKBFIT_DEBUG"):
            raise
        message = " ".join(str(err).split())
        print("wkbfit: error: %s" % message, file=sys.stderr)
        return EXIT_USAGE
    except (MemoryError, RuntimeError, ArithmeticError, TypeError) as err:
        # never a traceback for something the input caused; WKBFIT_DEBUG=1 shows it
        if os.environ.get("WKBFIT_DEBUG"):
            raise
        what = "out of memory: ask for less work" if isinstance(err, MemoryError) else \
            "the calculation failed (%s): %s" % (type(err).__name__, " ".join(str(err).split()))
        print("wkbfit: error: %s" % what, file=sys.stderr)
        return EXIT_USAGE


class _signals_exit:
    """While a command runs, SIGTERM and SIGHUP raise SystemExit (as Ctrl-C raises KeyboardInterrupt),
    so that the cleanup of temporary files runs when the command is killed; the handlers are restored
    afterwards. Only in the main thread (signal handlers cannot be set elsewhere)."""

    def __enter__(self):
        import signal
        import threading
        self.saved = {}
        if threading.current_thread() is threading.main_thread():
            for name in ("SIGTERM", "SIGHUP"):
                sig = getattr(signal, name, None)
                if sig is not None:
                    self.saved[sig] = signal.signal(sig, self._exit)
        return self

    @staticmethod
    def _exit(signum, frame):
        raise SystemExit(128 + signum)

    def __exit__(self, *exc):
        import signal
        for sig, handler in self.saved.items():
            signal.signal(sig, handler)
        return False


if __name__ == "__main__":
    sys.exit(main())
