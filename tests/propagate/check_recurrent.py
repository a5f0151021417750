"""Checks kindling's unrolled recurrent cells against NumPy.

The printer (reference/print_recurrent.cpp) exports draw 0 of an LSTM and a GRU cell
over 50 steps: the packed input and recurrent weights, the bias, the inputs and the loss
gradient on the last state, with the per-step second moments kindling measured in that
draw.  Here the same cells are unrolled with NumPy from those arrays, written from their
definitions (LSTM with a forget gate, Gers, Schmidhuber & Cummins 2000, gate blocks
[input, forget, candidate, output]; GRU of Cho et al. 2014, blocks [reset, update,
candidate], h = u h_prev + (1 - u) n), forward and back through time by the chain rule
step by step; every moment must agree to 1e-6 relative.
Usage: check_recurrent.py <kindling_propagate_print_recurrent>
"""

import numpy as np

from exported_draw import check_each, within


def sigmoid(z):
    return 1.0 / (1.0 + np.exp(-z))


def ms(a):
    return float(np.mean(a * a))


def lstm(W, U, b, xs, g):
    H = U.shape[1]
    h = np.zeros((H, xs[0].shape[1]))
    c = np.zeros_like(h)
    out = {"gates": [], "state": [], "cell": [], "state_gradient": [], "cell_gradient": []}
    tape = []
    for x in xs:
        z = W @ x + U @ h
        out["gates"].append([ms(z[k * H:(k + 1) * H]) for k in range(4)])
        z = z + b[:, None]
        i, f, gg, o = sigmoid(z[:H]), sigmoid(z[H:2 * H]), np.tanh(z[2 * H:3 * H]), sigmoid(z[3 * H:])
        c_prev = c
        c = f * c + i * gg
        h = o * np.tanh(c)
        tape.append((i, f, gg, o, c_prev, c))
        out["cell"].append(ms(c))
        out["state"].append(ms(h))
    dh, dc = g, np.zeros_like(g)
    sg, cg = [], []
    for i, f, gg, o, c_prev, c in reversed(tape):
        sg.append(ms(dh))
        tc = np.tanh(c)
        dc = dc + dh * o * (1 - tc ** 2)
        cg.append(ms(dc))
        dz = np.concatenate([dc * gg * i * (1 - i), dc * c_prev * f * (1 - f), dc * i * (1 - gg ** 2),
                             dh * tc * o * (1 - o)])
        dc = dc * f
        dh = U.T @ dz
    out["state_gradient"] = sg[::-1]
    out["cell_gradient"] = cg[::-1]
    return out


def gru(W, U, b, xs, g):
    H = U.shape[1]
    h = np.zeros((H, xs[0].shape[1]))
    out = {"gates": [], "state": [], "cell": [], "state_gradient": [], "cell_gradient": []}
    tape = []
    Ur, Uu, Un = U[:H], U[H:2 * H], U[2 * H:]
    for x in xs:
        a = W @ x
        zr, zu = a[:H] + Ur @ h, a[H:2 * H] + Uu @ h
        r, u = sigmoid(zr + b[:H, None]), sigmoid(zu + b[H:2 * H, None])
        zn = a[2 * H:] + Un @ (r * h)
        out["gates"].append([ms(zr), ms(zu), ms(zn)])
        n = np.tanh(zn + b[2 * H:, None])
        tape.append((h, r, u, n))
        h = u * h + (1 - u) * n
        out["state"].append(ms(h))
    dh = g
    sg = []
    for hp, r, u, n in reversed(tape):
        sg.append(ms(dh))
        dzn = dh * (1 - u) * (1 - n ** 2)
        dzu = dh * (hp - n) * u * (1 - u)
        drh = Un.T @ dzn
        dzr = drh * hp * r * (1 - r)
        dh = dh * u + drh * r + Ur.T @ dzr + Uu.T @ dzu
    out["state_gradient"] = sg[::-1]
    return out


def check_cell(directory, cell):
    stem = f"{directory}/{cell['kind']}"
    W, U = np.load(stem + ".input_weight.npy"), np.load(stem + ".recurrent_weight.npy")
    b = np.load(stem + ".bias.npy").reshape(-1)
    x, g = np.load(stem + ".input.npy"), np.load(stem + ".output_gradient.npy")
    n = W.shape[1]
    xs = [x[t * n:(t + 1) * n] for t in range(cell["steps"])]
    ref = (lstm if cell["kind"] == "lstm" else gru)(W, U, b, xs, g)
    failures = 0
    for key in ("gates", "state", "cell", "state_gradient", "cell_gradient"):
        mine, theirs = np.array(cell[key], dtype=float), np.array(ref[key], dtype=float)
        if mine.shape != theirs.shape:
            print(f"{cell['kind']} {key}: shape {mine.shape}, NumPy {theirs.shape}")
            failures += 1
            continue
        if mine.size == 0:
            continue
        rel = float(np.max(np.abs(mine - theirs) / np.abs(theirs)))
        failures += not within(f"{cell['kind']} {key}: {mine.size} values, max relative difference", rel, 1e-6)
    return failures


check_each(check_cell)
