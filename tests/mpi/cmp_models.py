"""Compares two omen model files (layout: src/model/file.c's header
comment): the metadata JSON apart from the training date and seconds must be
equal, and every parameter of the tensor table must agree within a relative
tolerance. Prints the worst difference; exits 1 when over the tolerance.
usage: cmp_models.py A B TOL"""
import array, json, struct, sys


def load(path):
    b = open(path, "rb").read()
    if b[:8] != b"OMENMODL":
        sys.exit("%s: not a model file" % path)
    n = struct.unpack_from("<Q", b, 24)[0]
    return json.loads(b[32:32 + n]), b


ma, a = load(sys.argv[1])
mb, b = load(sys.argv[2])
tol = float(sys.argv[3])
for m in (ma, mb):
    m["training"].pop("date", None)
    m["training"].pop("seconds", None)
if ma != mb:
    keys = [k for k in set(ma) | set(mb) if ma.get(k) != mb.get(k)]
    print("metadata differs: %s" % sorted(keys))
    sys.exit(1)
worst, count = 0.0, 0
for t in ma["tensors"]:
    k = t["shape"][0] * t["shape"][1] * t["shape"][2]
    x, y = array.array("f"), array.array("f")
    x.frombytes(a[t["offset"]:t["offset"] + 4 * k])
    y.frombytes(b[t["offset"]:t["offset"] + 4 * k])
    if len(x) != k or len(y) != k:
        sys.exit("tensor %s runs past the file" % t["name"])
    for u, v in zip(x, y):
        worst = max(worst, abs(u - v) / max(1.0, abs(u)))
    count += k
print("%d parameters, worst relative difference %.3g (tolerance %g)" % (count, worst, tol))
sys.exit(0 if worst <= tol else 1)
