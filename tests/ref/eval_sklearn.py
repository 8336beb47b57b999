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



def side_by_side():
    """eval's pooled figures per method (issue 11: base model alone, fine-tuned,
    from scratch, LR, lines added ...): every fold's test commits concatenated,
    then roc_auc_score and average_precision_score; the base model's Brier
    and ECE read its recalibrated probabilities. The 95% interval is omen's
    percentile bootstrap (Efron & Tibshirani 1993, from memory): checked to
    hold the AUC and to be no wider than 0.5 here, not to the digit (another
    random stream)."""
    global fails
    names = ["model", "lr_metrics", "lines_added", "model_per_line", "smallest_first",
             "base_rate", "base_model", "fine_tuned"]
    folds = []
    for k, n in enumerate([150, 220, 90, 310]):
        y = (rng.random(n) < 0.15 + 0.03 * k).astype(int)
        z = rng.normal(size=n) + 1.0 * y
        s = [1 / (1 + np.exp(-(z - 1.5))),                       # model
             1 / (1 + np.exp(-(0.6 * z + rng.normal(size=n) - 1.5))),   # lr
             np.floor(np.exp(2 + z + rng.normal(size=n))),        # lines added (ties)
             rng.random(n), -np.floor(rng.random(n) * 30),        # per line, smallest
             np.full(n, 0.15 + 0.03 * k),                         # base rate: ties
             1 / (1 + np.exp(-(0.8 * z + 0.5 * rng.normal(size=n)))),   # base model
             1 / (1 + np.exp(-(z + 0.3 * rng.normal(size=n) - 1.2)))]   # fine-tuned
        cal = 1 / (1 + np.exp(-(2 * np.log(s[6] / (1 - s[6])) - 2)))
        folds.append((y, s, cal))
    text = "%d\n" % len(folds)
    for y, s, cal in folds:
        text += "%d\n" % len(y)
        for i in range(len(y)):
            text += "%d %s %r\n" % (y[i], " ".join("%r" % float(v[i]) for v in s), float(cal[i]))
    out = subprocess.run([driver, "pooled"], input=text.encode(), stdout=subprocess.PIPE,
                         check=True).stdout.decode()
    got = {}
    for line in out.splitlines():
        f = line.split()
        got[f[1]] = [float(v) for v in f[2:]]
    y = np.concatenate([f[0] for f in folds])
    cal = np.concatenate([f[2] for f in folds])
    for m, name in enumerate(names):
        p = np.concatenate([f[1][m] for f in folds])
        auc, ap, brier, ece, lo, hi = got[name]
        check("pooled " + name, "auc", auc, roc_auc_score(y, p))
        check("pooled " + name, "ap", ap, average_precision_score(y, p))
        if name == "base_model":
            check("pooled " + name, "brier (recalibrated)", brier, brier_score_loss(y, cal))
        if not (lo <= auc <= hi and hi - lo < 0.5):
            fails += 1
            print("FAIL pooled %s: interval [%g, %g] around %g" % (name, lo, hi, auc))
        print("REF pooled %-15s n=%d auc %.6f [%.3f-%.3f] ap %.6f" % (name, len(y), auc, lo, hi, ap))


side_by_side()

if fails:
    sys.exit("eval_sklearn.py: %d mismatches" % fails)
print("REF eval metrics: all cases agree with scikit-learn %s" % __import__("sklearn").__version__)
