# One full forward and backward pass of the whole hierarchical model
# (src/model/model.c) against the same model written in PyTorch with the
# same weights and inputs: the loss, the logits and the gradient of every
# parameter tensor must agree (relative 1e-4 of the tensor's largest
# gradient, absolute 1e-6). PyTorch: conv1d, relu, gelu (exact erf), softmax,
# BCEWithLogitsLoss(pos_weight) and autograd.
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import torch
import torch.nn.functional as F

torch.set_default_dtype(torch.float64)
driver = os.path.join(os.environ["BUILD"], "ref", "model_driver")
tmp = tempfile.mkdtemp()
subprocess.run([driver, tmp], check=True)
meta = json.load(open(os.path.join(tmp, "batch.json")))
params = np.fromfile(os.path.join(tmp, "params.bin"), dtype=np.float32)
grad_c = np.fromfile(os.path.join(tmp, "grad.bin"), dtype=np.float32)
D, C, NM, EXT = meta["D"], meta["C"], meta["NM"], meta["EXT"]

P = {}
for t in meta["tensors"]:
    a = params[t["off"]:t["off"] + t["n"]].astype(np.float64)
    shape = [s for s in t["shape"]]
    P[t["name"]] = torch.tensor(a.reshape(shape), requires_grad=True)


def attnpool(x, q, off):
    out = []
    for s in range(len(off) - 1):
        seg = x[off[s]:off[s + 1]]
        if seg.shape[0] == 0:
            out.append(torch.zeros(x.shape[1]))
            continue
        a = torch.softmax(seg @ q.reshape(-1) / math.sqrt(x.shape[1]), dim=0)
        out.append((a[:, None] * seg).sum(0))
    return torch.stack(out)


def commit_vector(s):
    fo, ho, tok = s["file_off"], s["hunk_off"], s["tok"]
    nf = len(fo) - 1
    if nf == 0:
        return torch.zeros(C)
    # hunks: embedding, width-3 conv with zero padding inside each hunk, ReLU
    W = P["conv_w"].reshape(3, D, C).permute(2, 1, 0)   # [C, D, K]
    hv = []
    for h in range(len(ho) - 1):
        ids = torch.tensor(tok[ho[h]:ho[h + 1]], dtype=torch.long)
        e = P["tok_emb"].reshape(-1, D)[ids]            # [L, D]
        y = F.conv1d(e.t()[None], W, P["conv_b"].reshape(-1), padding=1)[0].t()
        y = F.relu(y)
        hv.append(attnpool(y, P["q_tok"], [0, y.shape[0]])[0])
    hv = torch.stack(hv) if hv else torch.zeros(0, C)
    fpool = attnpool(hv, P["q_hunk"], fo)
    facts = torch.tensor(s["facts"]).reshape(nf, -1)
    num = torch.cat([facts[:, :EXT], facts[:, EXT + 1:]], dim=1)
    ext = facts[:, EXT].long()
    fvec = fpool + num @ P["fact_w"].reshape(-1, C) + P["fact_b"].reshape(-1) + \
        P["ext_emb"].reshape(-1, C)[ext]
    return attnpool(fvec, P["q_file"], [0, nf])[0]


def message_vector(s):
    if not s["msg"]:
        return torch.zeros(D)
    ids = torch.tensor(s["msg"], dtype=torch.long)
    return P["msg_emb"].reshape(-1, D)[ids].mean(0)


def metrics(s):
    # log1p on the counts, entropy (3) and fix (7) raw; identity standardization
    m = torch.tensor(s["metrics"])
    out = m.clone()
    for j in range(NM):
        if j not in (3, 7):
            out[j] = torch.log1p(m[j].clamp(min=0))
    return out


rows = [torch.cat([commit_vector(s), message_vector(s), metrics(s)]) for s in meta["samples"]]
hin = torch.stack(rows)
h = F.gelu(hin @ P["h1_w"].reshape(-1, C) + P["h1_b"].reshape(-1))
met = torch.stack([metrics(s) for s in meta["samples"]])
z = (h @ P["h2_w"].reshape(C, 1) + P["h2_b"].reshape(-1) + met @ P["lin_w"].reshape(NM, 1)).reshape(-1)
y = torch.tensor(meta["y"], dtype=torch.float64)
loss = F.binary_cross_entropy_with_logits(z, y, pos_weight=torch.tensor(float(meta["pos_weight"])))
loss.backward()

ok = True
dz = np.abs(z.detach().numpy() - np.array(meta["logits"])).max()
dl = abs(loss.item() - meta["loss"])
print("loss omen %.7f torch %.7f; max logit diff %.2e" % (meta["loss"], loss.item(), dz))
if dl > 1e-5 or dz > 1e-5:
    ok = False
worst = 0.0
for t in meta["tensors"]:
    g_t = P[t["name"]].grad
    g_t = np.zeros(t["n"]) if g_t is None else g_t.numpy().reshape(-1)
    g_o = grad_c[t["off"]:t["off"] + t["n"]].astype(np.float64)
    scale = max(np.abs(g_t).max(), 1e-12)
    err = np.abs(g_t - g_o).max()
    rel = err / scale
    worst = max(worst, rel)
    print("  %-8s |grad| max %.3e  max diff %.2e  rel %.2e" % (t["name"], scale, err, rel))
    if err > 1e-6 + 1e-4 * scale:
        ok = False
if not ok:
    print("FAIL: model forward/backward differs from PyTorch")
    sys.exit(1)
print("REF model vs PyTorch: loss diff %.1e, logit diff %.1e, worst relative gradient diff %.1e "
      "over 15 tensors" % (dl, dz, worst))
