#!/usr/bin/python3
"""Checks every src/nn kernel, forward and backward, five AdamW steps and the
gradient clip against PyTorch (Debian python3-torch) on identical float32
weights and inputs.

The script writes the inputs as raw float32/int32 files, runs the C driver
($BUILD/ref/nn_driver) on them -- once on the default (AVX2 when present)
path and once with OMEN_NN_PORTABLE=1 -- computes the same things with torch
autograd, and compares.

Tolerances (stated per check below): a value passes when
    |c - t| <= atol + rtol * |t|
with rtol = 1e-5 and atol = 1e-6 for element-wise kernels, and atol = 1e-5
for the kernels that sum many products (conv, linear, pooling, layer norm
and their gradients: float32 sums taken in a different order than torch's).
If torch cannot be imported the script says so and exits 1: it never skips.
"""
import os
import subprocess
import sys
import tempfile

try:
    import numpy as np
    import torch
    import torch.nn.functional as F
except Exception as e:  # noqa: BLE001
    print("FAIL: cannot import torch/numpy (install Debian package python3-torch): %s" % e)
    sys.exit(1)

torch.set_num_threads(1)
torch.manual_seed(0)
rng = np.random.default_rng(20240611)

BUILD = os.environ.get("BUILD")
ROOT = os.environ.get("ROOT", ".")
if not BUILD:
    print("FAIL: BUILD is not set (run through make ref)")
    sys.exit(1)
DRIVER = os.path.join(BUILD, "ref", "nn_driver")
if not os.access(DRIVER, os.X_OK):
    print("FAIL: driver '%s' is missing (make BUILD=... ref builds it)" % DRIVER)
    sys.exit(1)

work = tempfile.mkdtemp(prefix="omen-nn-ref-")
shapes = {}


def put(name, arr, dtype=np.float32):
    a = np.ascontiguousarray(arr, dtype=dtype)
    a.tofile(os.path.join(work, name + ".bin"))
    return a


def get(name, shape):
    a = np.fromfile(os.path.join(work, name + ".out.bin"), dtype=np.float32)
    return a.reshape(shape)


def f32(*shape, lo=-1.0, hi=1.0):
    return rng.uniform(lo, hi, size=shape).astype(np.float32)


def T(a, grad=False):
    t = torch.from_numpy(np.array(a, dtype=np.float32))
    return t.requires_grad_(grad)


# ---- inputs ------------------------------------------------------------------
# embedding (sequence and bag); bag 2 is empty
V, D, TE = 50, 12, 40
emb_W = put("emb_W", f32(V, D))
emb_ids = put("emb_ids", rng.integers(0, V, size=TE), np.int32)
emb_dout = put("emb_dout", f32(TE, D))
bag_off = put("bag_off", [0, 5, 6, 6, 20, 21, 33, 40], np.int32)
SB = len(bag_off) - 1
bag_dout = put("bag_dout", f32(SB, D))
shapes.update(emb_V=V, emb_D=D, emb_T=TE, emb_S=SB)

# convolution: segments of 5, 1, 0, 2, 30, 3, 17 rows
conv_lens = [5, 1, 0, 2, 30, 3, 17]
conv_off = np.concatenate([[0], np.cumsum(conv_lens)]).astype(np.int32)
conv_cfg = {"conv3": (10, 20, 3), "conv5": (16, 33, 5)}
conv_in = {}
for pre, (ci, co, k) in conv_cfg.items():
    tt = int(conv_off[-1])
    conv_in[pre] = dict(
        x=put(pre + "_x", f32(tt, ci)), W=put(pre + "_W", f32(k, ci, co, lo=-0.5, hi=0.5)),
        b=put(pre + "_b", f32(co)), dout=put(pre + "_dout", f32(tt, co)))
    put(pre + "_off", conv_off, np.int32)
    shapes.update({pre + "_T": tt, pre + "_S": len(conv_lens), pre + "_Ci": ci,
                   pre + "_Co": co, pre + "_K": k})

# linear
LN_, LCi, LCo = 37, 24, 40
lin = dict(x=put("lin_x", f32(LN_, LCi)), W=put("lin_W", f32(LCi, LCo)), b=put("lin_b", f32(LCo)),
           dout=put("lin_dout", f32(LN_, LCo)))
shapes.update(lin_N=LN_, lin_Ci=LCi, lin_Co=LCo)

# activations
AN = 1000
act_x = put("act_x", f32(AN, lo=-5, hi=5))
act_dout = put("act_dout", f32(AN))
shapes.update(act_N=AN)

# layer norm
LNN, LNC = 9, 48
ln = dict(x=put("ln_x", f32(LNN, LNC, lo=-2, hi=3)), g=put("ln_g", f32(LNC, lo=0.5, hi=1.5)),
          b=put("ln_b", f32(LNC)), dout=put("ln_dout", f32(LNN, LNC)))
shapes.update(ln_N=LNN, ln_C=LNC)

# dropout (mask drawn by the C side from omen_rng; torch applies the same mask)
DN = 4000
drop_x = put("drop_x", f32(DN))
drop_dout = put("drop_dout", f32(DN))
shapes.update(drop_N=DN, drop_seed=11, drop_p_permille=300)

# pooling: sets of 4, 1, 0, 9, 25 rows
pool_lens = [4, 1, 0, 9, 25]
pool_off = np.concatenate([[0], np.cumsum(pool_lens)]).astype(np.int32)
PR, PS, PC = int(pool_off[-1]), len(pool_lens), 32
pool_x = put("pool_x", f32(PR, PC, lo=-2, hi=2))
pool_q = put("pool_q", f32(PC, lo=-2, hi=2))
pool_dout = put("pool_dout", f32(PS, PC))
put("pool_off", pool_off, np.int32)
shapes.update(pool_R=PR, pool_S=PS, pool_C=PC)

# BCE with logits, pos_weight 3
BN = 64
bce_z = put("bce_z", f32(BN, lo=-8, hi=8))
bce_y = put("bce_y", (rng.uniform(size=BN) < 0.3).astype(np.float32))
bce_w = put("bce_w", f32(BN, lo=0.5, hi=2))
shapes.update(bce_N=BN, bce_pw_permille=3000)

# concat
CN, CA, CB = 5, 7, 9
cat_a = put("cat_a", f32(CN, CA))
cat_b = put("cat_b", f32(CN, CB))
cat_dout = put("cat_dout", f32(CN, CA + CB))
shapes.update(cat_N=CN, cat_Ca=CA, cat_Cb=CB)

# AdamW: 300 parameters, the last 100 exempt from decay, 5 steps
AdN, ASteps = 300, 5
adam_w = put("adam_w", f32(AdN))
adam_g = put("adam_g", f32(ASteps, AdN, lo=-0.5, hi=0.5))
adam_decay = put("adam_decay", np.r_[np.ones(200), np.zeros(100)])
hp = np.array([1e-2, 0.9, 0.999, 1e-8, 0.1], dtype=np.float32)
put("adam_hp", hp)
shapes.update(adam_n=AdN, adam_steps=ASteps)

# clip_grad_norm_: max norm 1.5 (clips) and 1000 (does not)
clip_g = put("clip_g", f32(300))
shapes.update(clip_n=300, clip_max_permille=1500)

with open(os.path.join(work, "shapes.txt"), "w") as f:
    for k, v in shapes.items():
        f.write("%s %d\n" % (k, v))

# ---- torch references ------------------------------------------------------------
ref = {}

W_t = T(emb_W, True)
out = F.embedding(torch.from_numpy(emb_ids.astype(np.int64)), W_t)
out.backward(T(emb_dout))
ref["emb_out"], ref["emb_dW"] = out.detach().numpy(), W_t.grad.numpy()
W_t = T(emb_W, True)
out = F.embedding_bag(torch.from_numpy(emb_ids.astype(np.int64)), W_t,
                      torch.from_numpy(bag_off[:-1].astype(np.int64)), mode="mean")
out.backward(T(bag_dout))
ref["bag_out"], ref["bag_dW"] = out.detach().numpy(), W_t.grad.numpy()

for pre, (ci, co, k) in conv_cfg.items():
    c = conv_in[pre]
    x_t, W_t, b_t = T(c["x"], True), T(c["W"], True), T(c["b"], True)
    w_torch = W_t.permute(2, 1, 0)  # [K,Ci,Co] -> torch's [Co,Ci,K]
    outs = []
    for s in range(len(conv_lens)):
        lo, hi = int(conv_off[s]), int(conv_off[s + 1])
        if hi == lo:
            continue
        seg = x_t[lo:hi].t().unsqueeze(0)  # [1, Ci, L]; each segment padded on its own
        outs.append(F.conv1d(seg, w_torch, b_t, padding=k // 2)[0].t())
    out = torch.cat(outs, 0)
    out.backward(T(c["dout"]))
    ref[pre + "_out"], ref[pre + "_dx"] = out.detach().numpy(), x_t.grad.numpy()
    ref[pre + "_dW"], ref[pre + "_db"] = W_t.grad.numpy(), b_t.grad.numpy()

x_t, W_t, b_t = T(lin["x"], True), T(lin["W"], True), T(lin["b"], True)
out = F.linear(x_t, W_t.t(), b_t)
out.backward(T(lin["dout"]))
ref.update(lin_out=out.detach().numpy(), lin_dx=x_t.grad.numpy(), lin_dW=W_t.grad.numpy(),
           lin_db=b_t.grad.numpy())

for name, fn in (("relu", F.relu), ("gelu", lambda v: F.gelu(v))):  # exact erf GELU
    x_t = T(act_x, True)
    out = fn(x_t)
    out.backward(T(act_dout))
    ref[name + "_out"], ref[name + "_dx"] = out.detach().numpy(), x_t.grad.numpy()

x_t, g_t, b_t = T(ln["x"], True), T(ln["g"], True), T(ln["b"], True)
out = F.layer_norm(x_t, (LNC,), g_t, b_t, eps=1e-5)
out.backward(T(ln["dout"]))
xd = torch.from_numpy(ln["x"])
ref.update(ln_out=out.detach().numpy(), ln_dx=x_t.grad.numpy(), ln_dg=g_t.grad.numpy(),
           ln_db=b_t.grad.numpy(), ln_mean=xd.mean(1).numpy(),
           ln_rstd=(1.0 / torch.sqrt(xd.var(1, unbiased=False) + 1e-5)).numpy())

x_t, q_t = T(pool_x, True), T(pool_q, True)
outs, attn = [], []
for s in range(PS):
    lo, hi = int(pool_off[s]), int(pool_off[s + 1])
    if hi == lo:
        outs.append(torch.zeros(PC))
        continue
    seg = x_t[lo:hi]
    scores = seg @ q_t / np.sqrt(PC)              # explicit ops: scores = in @ q / sqrt(C)
    a = torch.softmax(scores, 0)                  # segment softmax
    attn.append(a)
    outs.append((a.unsqueeze(1) * seg).sum(0))    # weighted sum
out = torch.stack(outs)
out.backward(T(pool_dout))
ref.update(attn_out=out.detach().numpy(), attn_a=torch.cat(attn).detach().numpy(),
           attn_dx=x_t.grad.numpy(), attn_dq=q_t.grad.numpy())

x_t = T(pool_x, True)
outs, args = [], []
for s in range(PS):
    lo, hi = int(pool_off[s]), int(pool_off[s + 1])
    if hi == lo:
        outs.append(torch.zeros(PC))
        args.append(torch.full((PC,), -1, dtype=torch.int64))
        continue
    v, i = x_t[lo:hi].max(0)
    outs.append(v)
    args.append(i + lo)
out = torch.stack(outs)
out.backward(T(pool_dout))
ref.update(max_out=out.detach().numpy(), max_arg=torch.stack(args).numpy().astype(np.float32),
           max_dx=x_t.grad.numpy())

pw = torch.tensor(3.0)
losses, dzs = [], []
for w in (None, T(bce_w)):
    z_t = T(bce_z, True)
    loss = F.binary_cross_entropy_with_logits(z_t, T(bce_y), weight=w, pos_weight=pw,
                                              reduction="mean")
    loss.backward()
    losses.append(loss.item())
    dzs.append(z_t.grad.numpy())
ref.update(bce_loss=np.array(losses, dtype=np.float32), bce_dz=dzs[0], bce_dzw=dzs[1])

a_t, b_t = T(cat_a, True), T(cat_b, True)
out = torch.cat([a_t, b_t], 1)
out.backward(T(cat_dout))
ref.update(cat_out=out.detach().numpy(), cat_da=a_t.grad.numpy(), cat_db=b_t.grad.numpy())

p_dec, p_nodec = T(adam_w[:200], True), T(adam_w[200:], True)
lr, b1, b2, eps, wd = (float(v) for v in hp)  # the float32 values, as the C side uses
opt = torch.optim.AdamW([{"params": [p_dec], "weight_decay": wd},
                         {"params": [p_nodec], "weight_decay": 0.0}],
                        lr=lr, betas=(b1, b2), eps=eps, foreach=False)
for t in range(ASteps):
    p_dec.grad = T(adam_g[t, :200])
    p_nodec.grad = T(adam_g[t, 200:])
    opt.step()
st_d, st_n = opt.state[p_dec], opt.state[p_nodec]
ref.update(adam_w=torch.cat([p_dec, p_nodec]).detach().numpy(),
           adam_m=torch.cat([st_d["exp_avg"], st_n["exp_avg"]]).numpy(),
           adam_v=torch.cat([st_d["exp_avg_sq"], st_n["exp_avg_sq"]]).numpy())

norms, clipped = [], []
for mx in (1.5, 1000.0):
    p = T(np.zeros(300), True)
    p.grad = T(clip_g)
    norms.append(float(torch.nn.utils.clip_grad_norm_([p], mx)))
    clipped.append(p.grad.numpy().copy())
ref.update(clip_norms=np.array(norms, dtype=np.float32), clip_g1=clipped[0], clip_g2=clipped[1])

# ---- compare -----------------------------------------------------------------------
SUMS = 1e-5   # atol for kernels that sum many float32 products
ELEM = 1e-6   # atol for element-wise kernels
RTOL = 1e-5
checks = [
    ("embed fwd", "emb_out", ELEM), ("embed bwd dW", "emb_dW", ELEM),
    ("embag fwd", "bag_out", ELEM), ("embag bwd dW", "bag_dW", ELEM),
    ("linear fwd", "lin_out", SUMS), ("linear bwd din", "lin_dx", SUMS),
    ("linear bwd dW", "lin_dW", SUMS), ("linear bwd db", "lin_db", SUMS),
    ("relu fwd", "relu_out", ELEM), ("relu bwd", "relu_dx", ELEM),
    ("gelu fwd", "gelu_out", ELEM), ("gelu bwd", "gelu_dx", ELEM),
    ("layernorm fwd", "ln_out", SUMS), ("layernorm mean", "ln_mean", SUMS),
    ("layernorm rstd", "ln_rstd", SUMS), ("layernorm bwd din", "ln_dx", SUMS),
    ("layernorm bwd dg", "ln_dg", SUMS), ("layernorm bwd db", "ln_db", SUMS),
    ("attnpool fwd", "attn_out", SUMS), ("attnpool weights", "attn_a", SUMS),
    ("attnpool bwd din", "attn_dx", SUMS), ("attnpool bwd dq", "attn_dq", SUMS),
    ("maxpool fwd", "max_out", 0.0), ("maxpool argmax", "max_arg", 0.0),
    ("maxpool bwd", "max_dx", 0.0),
    ("bce loss", "bce_loss", ELEM), ("bce bwd dz", "bce_dz", ELEM),
    ("bce+weight bwd dz", "bce_dzw", ELEM),
    ("concat fwd", "cat_out", 0.0), ("concat bwd da", "cat_da", 0.0),
    ("concat bwd db", "cat_db", 0.0),
    ("adamw 5 steps w", "adam_w", ELEM), ("adamw 5 steps m", "adam_m", ELEM),
    ("adamw 5 steps v", "adam_v", ELEM),
    ("clip norm", "clip_norms", ELEM), ("clip grads (clipped)", "clip_g1", ELEM),
    ("clip grads (unclipped)", "clip_g2", 0.0),
]
for pre in conv_cfg:
    k = conv_cfg[pre][2]
    checks += [("conv1d K=%d fwd" % k, pre + "_out", SUMS), ("conv1d K=%d bwd din" % k, pre + "_dx", SUMS),
               ("conv1d K=%d bwd dW" % k, pre + "_dW", SUMS), ("conv1d K=%d bwd db" % k, pre + "_db", SUMS)]

failed = 0
for path_name, env_extra in (("avx2-or-default", {}), ("portable", {"OMEN_NN_PORTABLE": "1"})):
    env = dict(os.environ, **env_extra)
    r = subprocess.run([DRIVER, work], env=env, capture_output=True, text=True)
    if r.returncode != 0:
        print("FAIL: driver exit %d: %s" % (r.returncode, r.stderr.strip()))
        sys.exit(1)
    used = r.stdout.strip().split()[1] if r.stdout.strip() else "?"
    # dropout: same mask on both sides; torch applies it the way F.dropout does
    mask = get("drop_mask", (DN,))
    keep = mask.mean()
    xd = T(drop_x, True)
    od = xd * T(mask) / (1 - 0.3)
    od.backward(T(drop_dout))
    ref.update(drop_out=od.detach().numpy(), drop_dx=xd.grad.numpy())
    cks = checks + [("dropout fwd (same mask)", "drop_out", ELEM),
                    ("dropout bwd (same mask)", "drop_dx", ELEM)]
    worst = 0.0
    for label, key, atol in cks:
        want = ref[key]
        got = get(key, want.shape)
        err = np.abs(got.astype(np.float64) - want.astype(np.float64))
        lim = atol + RTOL * np.abs(want.astype(np.float64))
        ok = bool(np.all(err <= lim)) and got.shape == want.shape
        rel = float(np.max(err / (np.abs(want) + 1e-3))) if err.size else 0.0
        worst = max(worst, float(np.max(err / lim)) if err.size and lim.min() > 0 else 0.0)
        if not ok:
            failed += 1
            print("FAIL %-26s %s path: max abs err %.3e (atol %.0e rtol %.0e)"
                  % (label, used, float(err.max()), atol, RTOL))
        elif path_name != "portable":
            print("REF nn %-26s vs torch %s: max abs err %.2e, max rel err %.2e" %
                  (label, torch.__version__, float(err.max()), rel))
    print("REF nn %s path: %d checks, keep rate %.3f for p=0.3 dropout" % (used, len(cks), keep))
    if abs(keep - 0.7) > 4 * np.sqrt(0.21 / DN):
        failed += 1
        print("FAIL dropout keep rate %.3f, want 0.7" % keep)

if failed:
    print("nn_torch: %d checks failed" % failed)
    sys.exit(1)
print("nn_torch: all checks passed (rtol %.0e, atol %.0e sums / %.0e element-wise)" % (RTOL, SUMS, ELEM))
