"""omen's AUC, average precision, Brier score and calibration bins against
scikit-learn (Debian python3-sklearn): roc_auc_score, average_precision_score,
brier_score_loss and calibration_curve(strategy="uniform", n_bins=10), on
random and heavily tied inputs. ECE is recomputed here from the same bins
(Naeini et al., AAAI 2015: sum of n_b/n * |mean prediction - positive rate|).
Runs $BUILD/ref/eval_driver."""
import os
import subprocess
import sys

try:
    import numpy as np
    from sklearn.calibration import calibration_curve
    from sklearn.metrics import average_precision_score, brier_score_loss, roc_auc_score
except ImportError as e:  # the reference itself is missing: fail, never skip
    sys.exit("eval_sklearn.py: cannot import scikit-learn/numpy (%s); "
             "install Debian's python3-sklearn" % e)

build = os.environ.get("BUILD") or os.path.join(os.environ.get("ROOT", "."), "build")
driver = os.path.join(build, "ref", "eval_driver")
if not os.access(driver, os.X_OK):
    sys.exit("eval_sklearn.py: driver %s is missing (make ref builds it)" % driver)


def run(p, y):
    text = "%d\n" % len(p) + "".join("%r %d\n" % (float(a), int(b)) for a, b in zip(p, y))
    out = subprocess.run([driver], input=text.encode(), stdout=subprocess.PIPE, check=True)
    got = {"bins": {}}
    for line in out.stdout.decode().splitlines():
        f = line.split()
        if f[0] == "bin":
            got["bins"][int(f[1])] = (int(f[2]), float(f[3]), float(f[4]))
        else:
            got[f[0]] = float(f[1])
    return got


def close(a, b, tol=1e-9):
    return abs(a - b) <= tol * max(1.0, abs(b))


fails = 0


def check(name, what, got, want, tol=1e-9):
    global fails
    if not close(got, want, tol):
        fails += 1
        print("FAIL %s %s: omen %.17g sklearn %.17g" % (name, what, got, want))


def case(name, p, y):
    global fails
    before = fails
    p = np.asarray(p, dtype=float)
    y = np.asarray(y, dtype=int)
    g = run(p, y)
    check(name, "auc", g["auc"], roc_auc_score(y, p))
    check(name, "ap", g["ap"], average_precision_score(y, p))
    check(name, "brier", g["brier"], brier_score_loss(y, p))
    # calibration_curve drops empty bins; rebuild the bin ids the same way
    prob_true, prob_pred = calibration_curve(y, p, n_bins=10, strategy="uniform")
    bins = np.linspace(0.0, 1.0, 11)
    ids = np.searchsorted(bins[1:-1], p)
    counts = np.bincount(ids, minlength=10)
    nz = [b for b in range(10) if counts[b]]
    ece = 0.0
    for j, b in enumerate(nz):
        n, mp, mt = g["bins"][b]
        if n != counts[b]:
            fails += 1
            print("FAIL %s bin %d count: omen %d sklearn %d" % (name, b, n, counts[b]))
        check(name, "bin %d mean prediction" % b, mp, prob_pred[j])
        check(name, "bin %d positive rate" % b, mt, prob_true[j])
        ece += counts[b] / len(p) * abs(prob_pred[j] - prob_true[j])
    for b in range(10):
        if not counts[b] and g["bins"][b][0] != 0:
            fails += 1
            print("FAIL %s bin %d should be empty" % (name, b))
    check(name, "ece", g["ece"], ece)
    print("REF %-28s n=%-6d auc %.6f ap %.6f brier %.6f ece %.6f (%s)"
          % (name, len(p), g["auc"], g["ap"], g["brier"], g["ece"],
             "sklearn agrees" if fails == before else "MISMATCH"))


rng = np.random.default_rng(20240601)
# random, informative scores
y = (rng.random(2000) < 0.25).astype(int)
p = 1 / (1 + np.exp(-(rng.normal(size=2000) + 1.2 * y - 1)))
case("random n=2000", p, y)
# heavily tied: probabilities on a 0.1 grid, many exactly on bin edges
y = (rng.random(3000) < 0.3).astype(int)
p = np.clip(np.round(rng.random(3000) * 0.6 + 0.35 * y, 1), 0, 1)
case("tied 0.1 grid n=3000", p, y)
# extreme ties: two distinct values
y = (rng.random(500) < 0.4).astype(int)
p = np.where(rng.random(500) < 0.5 + 0.3 * y, 0.7, 0.2)
case("two values n=500", p, y)
# ties on a 0.05 grid with edge values 0, 0.3, 0.6, 0.7 and 1
y = (rng.random(1500) < 0.2).astype(int)
p = np.round(rng.random(1500) * 20) / 20
case("0.05 grid with 0 and 1 n=1500", p, y)
# small
case("tiny n=6", [0.9, 0.9, 0.4, 0.4, 0.1, 0.3], [1, 0, 1, 0, 0, 1])
# large
y = (rng.random(200000) < 0.1).astype(int)
p = 1 / (1 + np.exp(-(rng.normal(size=200000) + y - 2)))
case("random n=200000", p, y)

if fails:
    sys.exit("eval_sklearn.py: %d mismatches" % fails)
print("REF eval metrics: all cases agree with scikit-learn %s" % __import__("sklearn").__version__)
