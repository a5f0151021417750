"""Checks kindling's measured convolution passes against NumPy.

The printer (reference/print_convolution.cpp) exports draw 0 of several convolution
stacks: the weights and biases it drew, the input batch and the output gradient, with
each layer's geometry and the second moments kindling measured in that draw
(mean over units and samples of h^2 forward and of (dL/dh)^2 backward).  Here the same
forward and backward passes are recomputed with NumPy from those arrays, by a direct
convolution over kernel taps on a zero-padded array (numpy.pad, strided slices and
numpy.einsum; no patch matrix as in kindling), and the moments must agree to 1e-6
relative.
Usage: check_convolution.py <kindling_propagate_print_convolution>
"""
import itertools
import sys

import numpy as np

from exported_draw import exported_draw

# relu'(0) = 1, the derivative from the right (kindling's gain.hpp convention): exact
# zeros do occur, where every tap a depthwise unit reads is a zero from the ReLU below.
ACT = {
    "relu": (lambda h: np.maximum(h, 0.0), lambda h: (h >= 0).astype(float)),
    "tanh": (np.tanh, lambda h: 1.0 - np.tanh(h) ** 2),
    "identity": (lambda h: h, lambda h: np.ones_like(h)),
}


def taps(weight_shape, stride, padding, dilation, extent):
    """Per kernel tap: its index and the strided slice of the padded input it reads."""
    rank = len(extent)
    kernel = weight_shape[2:]
    out = [(extent[a] + 2 * padding[a] - dilation[a] * (kernel[a] - 1) - 1) // stride[a] + 1 for a in range(rank)]
    for k in itertools.product(*[range(n) for n in kernel]):
        sl = tuple(slice(k[a] * dilation[a], k[a] * dilation[a] + stride[a] * (out[a] - 1) + 1, stride[a])
                   for a in range(rank))
        yield k, sl, out


def conv_forward(x, w, b, groups, stride, padding, dilation):
    """x: [batch, C, *extent] -> [batch, O, *out]."""
    rank = x.ndim - 2
    xp = np.pad(x, [(0, 0), (0, 0)] + [(p, p) for p in padding])
    cog, cig = w.shape[0] // groups, w.shape[1]
    out = None
    for k, sl, oext in taps(w.shape, stride, padding, dilation, x.shape[2:]):
        if out is None:
            out = np.zeros((x.shape[0], w.shape[0]) + tuple(oext))
        patch = xp[(slice(None), slice(None)) + sl]
        for g in range(groups):
            wk = w[(slice(g * cog, (g + 1) * cog), slice(None)) + k]
            out[:, g * cog:(g + 1) * cog] += np.einsum("oc,bc...->bo...", wk, patch[:, g * cig:(g + 1) * cig])
    return out + b.reshape((1, -1) + (1,) * rank)


def conv_backward(delta, w, groups, stride, padding, dilation, extent):
    """delta: [batch, O, *out] -> gradient with respect to the input, [batch, C, *extent]."""
    cog, cig = w.shape[0] // groups, w.shape[1]
    grad = np.zeros((delta.shape[0], cig * groups) + tuple(e + 2 * p for e, p in zip(extent, padding)))
    for k, sl, _ in taps(w.shape, stride, padding, dilation, extent):
        for g in range(groups):
            wk = w[(slice(g * cog, (g + 1) * cog), slice(None)) + k]
            grad[(slice(None), slice(g * cig, (g + 1) * cig)) + sl] += np.einsum(
                "oc,bo...->bc...", wk, delta[:, g * cog:(g + 1) * cog])
    crop = tuple(slice(p, p + e) for p, e in zip(padding, extent))
    return grad[(slice(None), slice(None)) + crop]


def check_stack(directory, s):
    stem = f"{directory}/{s['name']}"
    x = np.load(stem + ".input.npy").T  # [batch, units]
    batch = x.shape[0]
    a = x.reshape((batch, s["channels"]) + tuple(s["extent"]))
    pre, caches = [], []
    for i, layer in enumerate(s["layers"]):
        w = np.load(f"{stem}.{i}.weight.npy")
        b = np.load(f"{stem}.{i}.bias.npy").reshape(-1)
        if "groups" in layer:
            h = conv_forward(a, w, b, layer["groups"], layer["stride"], layer["padding"], layer["dilation"])
        else:
            h = a.reshape(batch, -1) @ w.T + b
        caches.append((a.shape, w, layer))
        pre.append(h)
        a = ACT[layer["activation"]][0](h)
    d = np.load(stem + ".output_gradient.npy").T.reshape(pre[-1].shape)
    grads = [None] * len(pre)
    for i in reversed(range(len(pre))):
        layer = s["layers"][i]
        delta = ACT[layer["activation"]][1](pre[i]) * d
        grads[i] = delta
        in_shape, w, _ = caches[i]
        if "groups" in layer:
            d = conv_backward(delta, w, layer["groups"], layer["stride"], layer["padding"], layer["dilation"],
                              in_shape[2:])
        else:
            d = (delta @ w).reshape(in_shape)
    worst = 0.0
    for i, layer in enumerate(s["layers"]):
        for what, ours, theirs in (("forward", np.mean(pre[i] ** 2), layer["measured_forward"]),
                                   ("backward", np.mean(grads[i] ** 2), layer["measured_backward"])):
            rel = abs(theirs - ours) / abs(ours)
            worst = max(worst, rel)
            if not rel <= 1e-6:
                print(f"FAIL {s['name']} layer {i} {what}: kindling {theirs!r}, numpy {ours!r}, relative {rel:.3g}")
                return False
    print(f"ok {s['name']}: {len(s['layers'])} layers, worst relative difference {worst:.3g}")
    return True


def main():
    with exported_draw(sys.argv[1]) as (directory, stacks):
        ok = all([check_stack(directory, s) for s in stacks])
    sys.exit(0 if ok and len(stacks) == 4 else 1)


if __name__ == "__main__":
    main()
