"""Checks kindling's attention pass against NumPy.

The printer (reference/print_attention.cpp) exports draw 0 of three attention blocks
(one head; four heads; two heads with projections drawn at gain 3, a saturated softmax):
the four drawn projections and the inputs, with the moments kindling measured in that
draw.  Here the same forward pass is written from its definition (Vaswani et al.,
NeurIPS 2017, sec. 3.2.1 and 3.2.2: scaled dot-product attention per head, heads
concatenated, then the output projection) with numpy.einsum and a softmax over the keys;
every moment must agree to 1e-6 relative.
Usage: check_attention.py <kindling_propagate_print_attention>
"""
import sys

import numpy as np

from exported_draw import exported_draw


def forward(Wq, Wk, Wv, Wo, x, heads, length):
    d = x.shape[0]
    dk = d // heads
    batch = x.shape[1] // length
    # [batch, length, d]: column b L + i of x is token i of sequence b.
    tokens = x.T.reshape(batch, length, d)
    q, k, v = tokens @ Wq.T, tokens @ Wk.T, tokens @ Wv.T
    split = lambda a: a.reshape(batch, length, heads, dk).transpose(0, 2, 1, 3)  # [b, h, i, c]
    qh, kh, vh = split(q), split(k), split(v)
    s = np.einsum("bhic,bhjc->bhij", qh, kh) / np.sqrt(dk)
    e = np.exp(s - s.max(axis=-1, keepdims=True))
    p = e / e.sum(axis=-1, keepdims=True)
    oh = np.einsum("bhij,bhjc->bhic", p, vh)
    o = oh.transpose(0, 2, 1, 3).reshape(batch, length, d)
    y = o @ Wo.T
    norms = (tokens ** 2).sum(axis=-1)                                  # |x_i|^2, [b, i]
    mixed = np.einsum("bhij,bjf->bhif", p, tokens)                      # sum_j p_ij x_j
    ms = lambda a: float(np.mean(a * a))
    return {
        "input": ms(tokens), "query": ms(q), "key": ms(k), "value": ms(v), "score": ms(s),
        "concentration": float(np.mean((p ** 2).sum(axis=-1))), "largest_weight": float(np.mean(p.max(axis=-1))),
        "mix": ms(o), "output": ms(y),
        "token_norm": float(norms.mean()),
        "pair_norm": float(np.mean(np.einsum("bi,bj->bij", norms, norms))),
        "mixed_norm": float(np.mean((mixed ** 2).sum(axis=-1))),
        "mix_norm": float(np.mean((o ** 2).sum(axis=-1))),
    }


def main():
    failures = 0
    with exported_draw(sys.argv[1]) as (directory, blocks):
        for block in blocks:
            stem = f"{directory}/{block['name']}"
            W = [np.load(f"{stem}.{p}_weight.npy") for p in ("query", "key", "value", "output")]
            x = np.load(stem + ".input.npy")
            ref = forward(*W, x, block["heads"], block["length"])
            for key, theirs in ref.items():
                mine = block[key]
                rel = abs(mine - theirs) / abs(theirs)
                ok = rel <= 1e-6
                failures += not ok
                print(f"{block['name']} {key}: kindling {mine:.10g}, NumPy {theirs:.10g}, relative difference "
                      f"{rel:.2e} {'ok' if ok else 'FAILS (expected <= 1e-6)'}")
            # The conditional predictions read the weight variances the schemes declare:
            # the drawn weights' own mean square is within a few percent of them.
            for i, name in enumerate(("query", "key", "value", "output")):
                drawn = float(np.mean(W[i] ** 2))
                ok = abs(drawn / block["variances"][i] - 1) < 0.15
                failures += not ok
                print(f"{block['name']} {name} weight: mean square {drawn:.5g}, declared variance "
                      f"{block['variances'][i]:.5g} {'ok' if ok else 'FAILS (expected within 15%)'}")
    sys.exit(1 if failures else 0)


main()
