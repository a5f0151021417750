"""Checks kindling's attention pass against NumPy.

The printer (reference/print_attention.cpp) exports draw 0 of three attention blocks
(one head; four heads; two heads with projections drawn at gain 3, a saturated softmax):
the four drawn projections and the inputs, with the moments kindling measured in that
draw.  Here the same forward pass is written from its definition (Vaswani et al.,
NeurIPS 2017, sec. 3.2.1 and 3.2.2: scaled dot-product attention per head, heads
concatenated, then the output projection) with numpy.einsum and a softmax over the keys,
and the backward pass of the exported loss gradient g = dL/dy by hand (the chain rule,
with the softmax's Jacobian diag(p) - p p^T); every moment must agree to 1e-6 relative.
The hand-written backward pass is itself checked against central finite differences of
L(x) = sum(g * y(x)) along random directions (its input gradient) and along random
directions of each projection (the gradient of L with respect to W is dL/d(tensor) x^T,
so this covers dL/dq, dL/dk and dL/dv as well).
Usage: check_attention.py <kindling_propagate_print_attention>
"""

import numpy as np

from exported_draw import check_each, within


def forward(Wq, Wk, Wv, Wo, x, heads, length, g=None):
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
    if g is not None:  # the loss L = sum(g * y): its value, for the finite differences
        return float(np.sum(g.T.reshape(batch, length, d) * y))
    norms = (tokens ** 2).sum(axis=-1)                                  # |x_i|^2, [b, i]
    mixed = np.einsum("bhij,bjf->bhif", p, tokens)                      # sum_j p_ij x_j
    ms = lambda a: float(np.mean(a * a))
    return p, qh, kh, vh, tokens, o, {
        "input": ms(tokens), "query": ms(q), "key": ms(k), "value": ms(v), "score": ms(s),
        "concentration": float(np.mean((p ** 2).sum(axis=-1))), "largest_weight": float(np.mean(p.max(axis=-1))),
        "mix": ms(o), "output": ms(y),
        "token_norm": float(norms.mean()),
        "pair_norm": float(np.mean(np.einsum("bi,bj->bij", norms, norms))),
        "mixed_norm": float(np.mean((mixed ** 2).sum(axis=-1))),
        "mix_norm": float(np.mean((o ** 2).sum(axis=-1))),
    }


def backward(Wq, Wk, Wv, Wo, x, g, heads, length):
    """The chain rule through the pass above; returns the moments and the gradients
    with respect to x and to each projection (for the finite differences)."""
    d = x.shape[0]
    dk = d // heads
    batch = x.shape[1] // length
    p, qh, kh, vh, tokens, o, ref = forward(Wq, Wk, Wv, Wo, x, heads, length)
    gy = g.T.reshape(batch, length, d)                                  # dL/dy, [b, i, d]
    go = gy @ Wo                                                        # dL/do = W_o^T g
    goh = go.reshape(batch, length, heads, dk).transpose(0, 2, 1, 3)    # [b, h, i, c]
    gv = np.einsum("bhij,bhic->bhjc", p, goh)                           # sum_i p_ij dL/do_i
    gp = np.einsum("bhic,bhjc->bhij", goh, vh)                          # dL/do_i . v_j
    gs = p * (gp - (p * gp).sum(axis=-1, keepdims=True))                # softmax Jacobian
    gq = np.einsum("bhij,bhjc->bhic", gs, kh) / np.sqrt(dk)
    gk = np.einsum("bhij,bhic->bhjc", gs, qh) / np.sqrt(dk)
    merge = lambda a: a.transpose(0, 2, 1, 3).reshape(batch, length, d)
    gq, gk, gv = merge(gq), merge(gk), merge(gv)
    gx = gq @ Wq + gk @ Wk + gv @ Wv
    ms = lambda a: float(np.mean(a * a))
    xnorm = (tokens ** 2).sum(axis=-1)                                  # |x_j|^2, [b, j]
    gonorm = (goh ** 2).sum(axis=-1)                                    # |dL/do_i (head)|^2, [b, h, i]
    m = np.einsum("bhij,bif->bhjf", p, gy)                              # sum_i p_ij g_i
    ref.update({
        "output_gradient": ms(gy), "mix_gradient": ms(go), "softmax_gradient": ms(gp), "score_gradient": ms(gs),
        "query_gradient": ms(gq), "key_gradient": ms(gk), "value_gradient": ms(gv), "input_gradient": ms(gx),
        "gradient_norm": float(np.mean((gy ** 2).sum(axis=-1))),
        "gradient_pair_norm": float(np.mean(np.einsum("bhi,bj->bhij", gonorm, xnorm))),
        "mixed_gradient_norm": float(np.mean((m ** 2).sum(axis=-1))),
    })
    tok = lambda a: a.reshape(batch * length, d).T                      # back to [d, L batch]
    grads = {"x": tok(gx), "Wq": tok(gq) @ tok(tokens).T, "Wk": tok(gk) @ tok(tokens).T,
             "Wv": tok(gv) @ tok(tokens).T, "Wo": tok(gy) @ tok(o).T}
    return ref, grads


def finite_differences(W, x, g, heads, length, grads, rng):
    """Largest relative difference between the hand-written gradients and central
    differences of L along three random unit directions of x and of each projection."""
    worst = 0.0
    args = {"Wq": 0, "Wk": 1, "Wv": 2, "Wo": 3}
    for name, grad in grads.items():
        for _ in range(3):
            u = rng.standard_normal(grad.shape)
            u /= np.linalg.norm(u)
            eps = 1e-5
            def loss(sign):
                Ws = list(W)
                xs = x
                if name == "x":
                    xs = x + sign * eps * u
                else:
                    Ws[args[name]] = W[args[name]] + sign * eps * u
                return forward(*Ws, xs, heads, length, g)
            numeric = (loss(1) - loss(-1)) / (2 * eps)
            exact = float(np.sum(grad * u))
            worst = max(worst, abs(numeric - exact) / max(abs(exact), 1e-3))
    return worst


def check_block(directory, block):
    stem = f"{directory}/{block['name']}"
    W = [np.load(f"{stem}.{p}_weight.npy") for p in ("query", "key", "value", "output")]
    x = np.load(stem + ".input.npy")
    g = np.load(stem + ".output_gradient.npy")
    ref, grads = backward(*W, x, g, block["heads"], block["length"])
    worst = finite_differences(W, x, g, block["heads"], block["length"], grads, np.random.default_rng(11))
    failures = not within(f"{block['name']} backward pass by hand against central differences: largest relative "
                          f"difference", worst, 1e-5)
    for key, theirs in ref.items():
        mine = block[key]
        failures += not within(f"{block['name']} {key}: kindling {mine:.10g}, NumPy {theirs:.10g}, relative "
                               f"difference", abs(mine - theirs) / abs(theirs), 1e-6)
    # The conditional predictions read the weight variances the schemes declare: the
    # drawn weights' own mean square is within a few percent of them.
    for i, name in enumerate(("query", "key", "value", "output")):
        drawn = float(np.mean(W[i] ** 2))
        failures += not within(f"{block['name']} {name} weight: mean square {drawn:.5g}, declared variance "
                               f"{block['variances'][i]:.5g}, relative difference",
                               abs(drawn / block["variances"][i] - 1), 0.15)
    return failures


check_each(check_block)
