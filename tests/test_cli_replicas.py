"""`wkbfit fit ... --replicas N [--scheduler ADDRESS]`: the replicas from the command line."""
import numpy as np

import wkbfit
from wkbfit import cli

MU = 6.66420389
TRUE = wkbfit.Morse(De=5875.0, re=3.67, a=0.6)


def write_data(path):
    # levels from the exact radial solver plus seeded noise (invented data)
    rng = np.random.default_rng(8)
    lines = ["v,J,energy,uncertainty"]
    for J in (0, 10):
        E = wkbfit.levels(TRUE, MU, v=list(range(20)), J=J, method="exact").energy
        lines += ["%d,%d,%.6f,0.01" % (v, J, e + rng.normal(0, 0.01)) for v, e in enumerate(E)]
    path.write_text("\n".join(lines) + "\n")
    return str(path)


def test_fit_with_replicas(capsys, tmp_path):
    data = write_data(tmp_path / "levels.csv")
    argv = ["fit", data, "morse", "De=5800", "re=3.66", "a=0.61", "--mu", str(MU), "-o", str(tmp_path / "r.json"),
            "--replicas", "40", "--seed", "4", "--threads", "1", "--no-progress"]
    assert cli.main(argv) == 0
    out = capsys.readouterr().out
    assert "monte-carlo replicas of the fit of a Morse potential" in out and "40 replicas, 40 converged" in out
    # the printed sd is that of the same replicas from Python
    result = wkbfit.FitResult.load_json(tmp_path / "r.json")
    reps = wkbfit.fit(TRUE.with_params(De=5800, re=3.66, a=0.61), data, MU).bootstrap(40, seed=4, progress=False)
    line = next(x for x in out.splitlines() if x.startswith("De "))
    assert "%.10g" % reps.std["De"] in line
    assert abs(result.params["De"].value - reps.central["De"]) < 1e-9

    assert "refits: linearised" in out  # the default, with its exact check
    assert cli.main(argv[:-7] + ["--replicas", "10", "--replica-kind", "resample", "--no-progress", "--force"]) == 0
    assert "resample replicas" in capsys.readouterr().out
    assert cli.main(argv[:-7] + ["--replicas", "4", "--replica-refit", "full", "--no-progress", "--force"]) == 0
    assert "refits: every replica refitted through wkbfit.fit" in capsys.readouterr().out


def test_bad_replica_options(capsys, tmp_path):
    data = write_data(tmp_path / "levels.csv")
    base = ["fit", data, "morse", "De=5800", "re=3.66", "a=0.61", "--mu", str(MU), "-o", str(tmp_path / "r.json")]
    for extra, fragment in ((["--replicas", "0"], "--replicas"), (["--replica-kind", "jack"], "--replica-kind"),
                            (["--replicas", "5", "--replica-refit", "fast"], "--replica-refit"),
                            (["--replicas", "5", "--scheduler", "nowhere"], "'nowhere'")):
        assert cli.main(base + extra) == 2
        err = capsys.readouterr().err
        assert err.startswith("wkbfit: error: ") and fragment in err, err
