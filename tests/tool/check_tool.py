#!/usr/bin/python3
"""Runs the built `kindling` tool and checks it from outside: exit codes, one-line
errors, files never replaced by a failed run, --region against the whole tensor, and
NumPy (Debian python3-numpy, numpy.load / numpy.lib.format) reading our .npy files and
writing files we read. Usage: check_tool.py KINDLING CASE WORKDIR."""
import json
import os
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np

KINDLING, CASE, WORK = sys.argv[1], sys.argv[2], sys.argv[3]
os.makedirs(WORK, exist_ok=True)
os.chdir(WORK)
failures = []


def run(*args):
    p = subprocess.run([KINDLING, *args], capture_output=True, text=True)
    return p.returncode, p.stdout, p.stderr


def expect(cond, what):
    if not cond:
        failures.append(what)


def expect_code(code, *args):
    rc, out, err = run(*args)
    expect(rc == code, f"{' '.join(args)}: exit {rc}, expected {code} (stderr: {err!r})")
    if code == 2:
        expect(err.count("\n") == 1 and err.endswith("\n") and len(err) > 20,
               f"{' '.join(args)}: expected one clear line on stderr, got {err!r}")
    else:
        expect(err == "", f"{' '.join(args)}: expected nothing on stderr (not a terminal), got {err!r}")
    return out, err


def bf16_to_f32(bits):
    return (bits.astype(np.uint32) << 16).view(np.float32)


def f32_to_bf16_bits(x):
    # round to nearest even on the dropped 16 bits (no NaN in these tensors)
    u = x.astype(np.float32).view(np.uint32).astype(np.uint64)
    return ((u + 0x7FFF + ((u >> 16) & 1)) >> 16).astype(np.uint16)


if CASE == "exit-codes":
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "512x256", "--seed", "7", "-o", "w.npy")
    expect_code(0, "check", "w.npy", "--expect", "he-normal")
    expect_code(0, "check", "w.npy", "--identify")
    expect_code(1, "check", "w.npy", "--expect", "glorot-normal")           # wrong scheme: a failed check
    expect_code(1, "check", "w.npy", "--expect", "he-normal", "--fan-in", "128")  # wrong fan
    expect_code(0, "draw", "--scheme", "delta-orthogonal", "--shape", "16x8x3x3", "-o", "d.npy")
    expect_code(0, "check", "d.npy", "--expect", "delta-orthogonal")
    expect_code(0, "draw", "--scheme", "orthogonal", "--shape", "16x8x3x3", "-o", "q.npy")
    expect_code(1, "check", "q.npy", "--expect", "delta-orthogonal")        # nonzero taps off the centre
    expect_code(0, "draw", "--scheme", "zeros", "--shape", "16x8", "-o", "z.npy")
    expect_code(1, "check", "z.npy")                                          # symmetry fails on zeros
    expect_code(0, "plan")
    for bad in (["draw", "--scheme", "xavier", "--shape", "4x4", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x0", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4xq", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--dtype", "f8", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--region", "0:5,0:4", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--region", "0:4", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4x3", "--layout", "oi", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4x3x3", "--layout", "hiwo", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "64", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--std", "1", "-o", "b.npy"],
                ["draw", "--scheme", "normal", "--shape", "4x4", "-o", "b.npy"],
                ["draw", "--scheme", "glorot-uniform", "--shape", "4x4", "--gain", "-1", "-o", "b.npy"],
                ["draw", "--scheme", "sparse", "--shape", "4x4", "--nonzero", "9", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--threads", "0", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--fan-in", "0", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "--bogus", "-o", "b.npy"],
                ["draw", "--scheme", "he-normal", "--shape", "4x4", "-o", "no_such_dir/b.npy"],
                ["check", "no_such_file.npy"],
                ["check", "w.npy", "--expect", "xavier"],
                ["check", "w.npy", "--std", "1"],
                ["check", "w.npy", "--layout", "oihw"],
                ["plan", "no_such_spec.json"],
                ["frobnicate"],
                []):
        expect_code(2, *bad)
    expect(not os.path.exists("b.npy"), "a failed draw left b.npy behind")
    with open("bad.json", "w") as f:
        f.write('{"input": {"width": 8}, "layers": [{"width": -1, "activation": "relu", "scheme": "he-normal"}]}')
    _, err = expect_code(2, "plan", "bad.json")
    expect("layers[0].width" in err, f"expected the key path in the plan error, got {err!r}")
    for option, value in (("--trials", "1"), ("--batch", "0")):
        _, err = expect_code(2, "plan", "--measure", option, value)
        expect(option in err, f"expected {option} named in the plan error, got {err!r}")
    with open("junk.npy", "wb") as f:
        f.write(b"not a numpy file")
    _, err = expect_code(2, "check", "junk.npy")
    expect("magic" in err, f"expected the magic string named, got {err!r}")

elif CASE == "untouched":
    # An existing output file is never replaced by a failed run.
    for bad in (["--scheme", "xavier", "--shape", "4x4"],
                ["--scheme", "sparse", "--shape", "8x4", "--nonzero", "5"],      # fails in the scheme's check
                ["--scheme", "identity", "--shape", "8x4x3"],                     # fails in the scheme's check
                ["--scheme", "he-normal", "--shape", "8x4", "--region", "0:9,0:4"]):
        with open("keep.npy", "wb") as f:
            f.write(b"precious")
        expect_code(2, "draw", *bad, "-o", "keep.npy")
        with open("keep.npy", "rb") as f:
            expect(f.read() == b"precious", f"draw {' '.join(bad)} changed the existing output file")
        expect(not [n for n in os.listdir(".") if n.endswith((".kindling-tmp", ".kindling-partial"))],
               "a temporary file was left behind")
    # ... and a good run replaces it completely.
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "8x4", "-o", "keep.npy")
    expect(np.load("keep.npy").shape == (8, 4), "a good run should replace the file")
    with open("plot.svg", "w") as f:
        f.write("precious")
    with open("bad.json", "w") as f:
        f.write('{"input": {"width": 8}, "layers": [{"width": 2, "activation": "relu"}]}')
    expect_code(2, "plan", "bad.json", "--svg", "plot.svg")
    expect(open("plot.svg").read() == "precious", "a failed plan changed the existing SVG")

elif CASE == "region":
    # --region writes exactly that block of the whole tensor (the reproducibility contract).
    for scheme, shape, region, extra in (
            ("he-normal", "512x256", "0:128,0:256", []),
            ("glorot-uniform", "300x200", "17:123,5:199", ["--dtype", "f64"]),
            ("truncated-normal", "16x8x3x3", "2:9,0:8,1:3,0:2", ["--std", "0.1", "--dtype", "bf16"]),
            ("sparse", "64x48", "10:30,20:48", ["--nonzero", "5", "--dtype", "f16"]),
            ("orthogonal", "96x64", "32:64,0:64", ["--gain", "1.5"]),
            ("he-uniform", "1000x999", "999:1000,0:999", ["--threads", "2"])):
        expect_code(0, "draw", "--scheme", scheme, "--shape", shape, "--seed", "11", "--name", "enc.w", *extra,
                    "-o", "whole.npy")
        expect_code(0, "draw", "--scheme", scheme, "--shape", shape, "--seed", "11", "--name", "enc.w", *extra,
                    "--region", region, "-o", "part.npy")
        whole, part = np.load("whole.npy"), np.load("part.npy")
        block = whole[tuple(slice(int(a), int(b)) for a, b in (r.split(":") for r in region.split(",")))]
        expect(block.shape == part.shape and block.tobytes() == part.tobytes(),
               f"{scheme} {shape} --region {region}: the block differs from the whole tensor's")
    # check of a --region file: --full-shape gives the whole tensor's fans (the .npy
    # header cannot record them). Without it the block's own shape gives fan-in 256, not
    # 2048, and He normal fails; with it the block passes.
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "512x2048", "--seed", "4", "--region", "0:512,0:256",
                "-o", "block.npy")
    expect_code(1, "check", "block.npy", "--expect", "he-normal")
    code, out, err = run("check", "block.npy", "--expect", "he-normal", "--full-shape", "512x2048")
    expect(code == 0 and "a block of [512, 2048]" in out and "fan-in 2048" in out, f"check --full-shape: {code} {out!r} {err!r}")
    code, out, _ = run("check", "block.npy", "--expect", "he-normal", "--full-shape", "512x2048", "--json")
    expect(code == 0 and json.loads(out)["full_shape"] == [512, 2048], f"check --full-shape --json: {out!r}")
    expect_code(0, "draw", "--scheme", "identity", "--shape", "64x64", "--region", "16:32,0:64", "-o", "eye.npy")
    expect_code(0, "check", "eye.npy", "--expect", "identity", "--full-shape", "64x64", "--region", "16:32,0:64")
    expect_code(1, "check", "eye.npy", "--expect", "identity", "--full-shape", "64x64", "--region", "0:16,0:64")
    code, _, err = run("check", "eye.npy", "--expect", "identity", "--full-shape", "64x64")
    expect(code == 2 and "give --region" in err, f"identity block without --region: {code} {err!r}")
    code, _, err = run("check", "eye.npy", "--expect", "orthogonal", "--full-shape", "64x64")
    expect(code == 2 and "the whole tensor" in err, f"orthogonal block: {code} {err!r}")
    code, _, err = run("check", "eye.npy", "--region", "16:32,0:64")
    expect(code == 2 and "needs --full-shape" in err, f"--region without --full-shape: {code} {err!r}")
    code, _, err = run("check", "eye.npy", "--full-shape", "8x64")
    expect(code == 2 and "smaller than FILE" in err, f"--full-shape smaller than the file: {code} {err!r}")
    code, _, err = run("check", "eye.npy", "--full-shape", "64x64", "--region", "0:8,0:64")
    expect(code == 2 and "expected the region draw wrote" in err, f"--region of another size: {code} {err!r}")
    # the thread count does not change a value
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "700x500", "--threads", "1", "-o", "t1.npy")
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "700x500", "--threads", "2", "-o", "t2.npy")
    expect(np.load("t1.npy").tobytes() == np.load("t2.npy").tobytes(), "values changed with --threads")

elif CASE == "packed":
    # draw --blocks: a packed gate weight (GRU 3, LSTM 4) drawn block by block, each block
    # with its own fans and sub-stream. The library's own packed layer is what `kindling
    # assemble` writes for a plan's "packed" parameter (initialize_model ->
    # initialize(view, packed_dense, ...)): the draw must equal it byte for byte.
    def packed_plan(name, scheme, dtype, blocks, n_in, block_out, layout):
        layer = {"kind": "packed", "blocks": blocks, "in": n_in, "block_out": block_out}
        if layout == "io":
            layer["layout"] = "in_out"
        return {"format": "kindling-model-plan", "seed": 9,
                "parameters": [{"name": name, "scheme": scheme, "dtype": dtype, "layer": layer}]}

    for name, scheme, flags, dtype, blocks, n_in, block_out, layout in (
            ("gru.w_ih", "glorot-uniform", [], "f32", 3, 32, 48, "oi"),
            ("gru.w_hh", "orthogonal", [], "f64", 3, 48, 48, "oi"),
            ("lstm.w_ih", "he-normal", [], "bf16", 4, 20, 16, "io"),
            ("lstm.w_hh", "glorot-normal", ["--gain", "1.5"], "f16", 4, 16, 16, "oi"),
            ("attn.qkv", "truncated-normal", ["--std", "0.02"], "f32", 3, 24, 24, "io")):
        rows = blocks * block_out
        shape = f"{rows}x{n_in}" if layout == "oi" else f"{n_in}x{rows}"
        draw = ["draw", "--scheme", scheme, *flags, "--shape", shape, "--layout", layout, "--blocks", str(blocks),
                "--dtype", dtype, "--seed", "9", "--name", name]
        out, _ = expect_code(0, *draw, "-o", "packed.npy")
        expect(f"{blocks} gate blocks of" in out and f"fan-in {n_in}, fan-out {block_out} each" in out,
               f"draw --blocks {blocks}: the summary does not give each block's fans: {out!r}")
        text = scheme + ("(gain=1.5)" if "--gain" in flags else "(std=0.02)" if "--std" in flags else "")
        json.dump(packed_plan(name, text, dtype, blocks, n_in, block_out, layout), open("packed_plan.json", "w"))
        expect_code(0, "assemble", "packed_plan.json", "-o", "packed.npz")
        drawn = np.load("packed.npy")
        with np.load("packed.npz") as z:
            library = z[name]
        expect(drawn.shape == library.shape and drawn.dtype == library.dtype and drawn.tobytes() == library.tobytes(),
               f"{name}: draw --blocks {blocks} differs from the library's packed layer (assemble)")
        # Without --blocks the whole tensor is one weight: other values.
        expect_code(0, *[a for a in draw if a not in ("--blocks", str(blocks))], "-o", "unpacked.npy")
        expect(np.load("unpacked.npy").tobytes() != drawn.tobytes(), f"{name}: --blocks changed nothing")
        # A region across a block boundary, on 2 threads, is that block of the whole.
        half = block_out // 2
        region = f"{half}:{block_out + half},0:{n_in}" if layout == "oi" else f"0:{n_in},{half}:{block_out + half}"
        expect_code(0, *draw, "--region", region, "--threads", "2", "-o", "part.npy")
        cut = tuple(slice(int(a), int(b)) for a, b in (r.split(":") for r in region.split(",")))
        expect(np.load("part.npy").tobytes() == drawn[cut].tobytes(), f"{name}: --region {region} with --blocks")

    # Per-gate fans: each block of a packed Glorot-uniform weight is Glorot uniform for
    # fans (in, block_out) = (32, 48), bound sqrt(6 / 80) (Glorot & Bengio 2010, eq. 16),
    # and `kindling check` of the block alone (its own shape gives those fans) passes;
    # the whole [144, 32] tensor read as one weight (fans 32, 144: bound sqrt(6 / 176))
    # fails. The unpacked draw, drawn with the whole tensor's fans, fails the per-gate
    # check in every block: the bug --blocks is about.
    expect_code(0, "draw", "--scheme", "glorot-uniform", "--shape", "144x32", "--blocks", "3", "--seed", "9",
                "--name", "gru.w_ih", "-o", "gates.npy")
    expect_code(0, "draw", "--scheme", "glorot-uniform", "--shape", "144x32", "--seed", "9", "--name", "gru.w_ih",
                "-o", "whole_fans.npy")
    gates, whole_fans = np.load("gates.npy"), np.load("whole_fans.npy")
    bound = np.sqrt(6 / (32 + 48))
    for b in range(3):
        block = gates[48 * b:48 * (b + 1)]
        expect(np.abs(block).max() < bound and np.abs(block).max() > 0.95 * bound,
               f"gate block {b}: max |w| {np.abs(block).max()}, expected just under {bound}")
        np.save(f"gate{b}.npy", block)
        out, _ = expect_code(0, "check", f"gate{b}.npy", "--expect", "glorot-uniform")
        expect("fan-in 32, fan-out 48" in out, f"check of gate block {b}: {out!r}")
        np.save(f"wrong{b}.npy", whole_fans[48 * b:48 * (b + 1)])
        expect_code(1, "check", f"wrong{b}.npy", "--expect", "glorot-uniform")
    expect_code(1, "check", "gates.npy", "--expect", "glorot-uniform")
    expect(not np.array_equal(gates[:48], gates[48:96]), "gate blocks 0 and 1 are equal")
    # check --blocks does the same on the whole file: check_scheme of each gate block with
    # its own fans (the family-wise alpha split over the blocks).
    out, _ = expect_code(0, "check", "gates.npy", "--blocks", "3", "--expect", "glorot-uniform")
    expect("3 gate blocks of [48, 32], fan-in 32, fan-out 48 each" in out and "block 2: " in out,
           f"check --blocks 3: {out!r}")
    out, _ = expect_code(1, "check", "whole_fans.npy", "--blocks", "3", "--expect", "glorot-uniform")
    expect("block 0: " in out and "variance FAILED" in out, f"check --blocks 3 of the unpacked draw: {out!r}")
    out, _ = expect_code(0, "check", "gates.npy", "--blocks", "3", "--expect", "glorot-uniform", "--json")
    expect(json.loads(out)["blocks"] == 3 and json.loads(out)["fans"]["fan_out"] == 48, f"check --blocks --json: {out!r}")
    expect_code(0, "draw", "--scheme", "orthogonal", "--shape", "144x48", "--blocks", "3", "-o", "w_hh.npy")
    expect_code(0, "check", "w_hh.npy", "--blocks", "3", "--expect", "orthogonal")
    expect_code(1, "check", "w_hh.npy", "--expect", "orthogonal")  # the stack is not one orthogonal matrix
    for args, words in ((["--blocks", "5"], ["--blocks 5 does not divide the output axis of FILE 'gates.npy'"]),
                        (["--blocks", "3", "--identify"], ["--identify with --blocks 3", "expected no --identify"]),
                        (["--blocks", "3", "--expect", "identity"], ["--expect identity with --blocks 3"]),
                        (["--blocks", "3", "--expect", "he-normal", "--fan-in", "32"], ["--fan-in does not apply"]),
                        (["--blocks", "3", "--full-shape", "288x32"], ["checks a whole packed weight"])):
        _, err = expect_code(2, "check", "gates.npy", *args)
        expect(all(w in err for w in words), f"check {' '.join(args)}: expected {words} in {err!r}")

    # Bad values: exit 2 naming --blocks, its value and what was expected; nothing written.
    for args, words in (
            (["--blocks", "0"], ["--blocks '0'", "expected a whole number from 1"]),
            (["--blocks", "three"], ["--blocks 'three'", "expected a whole number"]),
            (["--blocks", "-3"], ["--blocks '-3'"]),
            (["--blocks", "5"], ["--blocks 5 does not divide the output axis", "144 outputs", "expected a divisor of 144"]),
            (["--blocks", "3", "--layout", "io"], ["--blocks 3 does not divide", "32 outputs", "layout io"]),
            (["--blocks", "3", "--fan-in", "32"], ["--fan-in does not apply with --blocks 3", "expected no --fan-in"]),
            (["--blocks", "3", "--fan-out", "48"], ["--fan-out does not apply with --blocks 3"])):
        if os.path.exists("bad.npy"):
            os.remove("bad.npy")
        _, err = expect_code(2, "draw", "--scheme", "glorot-uniform", "--shape", "144x32", *args, "-o", "bad.npy")
        expect(all(w in err for w in words), f"draw {' '.join(args)}: expected {words} in {err!r}")
        expect(not os.path.exists("bad.npy"), f"draw {' '.join(args)} wrote a file")
    _, err = expect_code(2, "draw", "--scheme", "he-normal", "--shape", "48x16x3", "--blocks", "3", "-o", "bad.npy")
    expect("--blocks 3" in err and "--shape 48x16x3 has rank 3" in err and "expected a rank-2 shape" in err, f"rank 3: {err!r}")
    # The scheme is checked against each block: 40 nonzero weights a unit do not fit a
    # block's 32 inputs (the whole tensor's fans would not say so either: 32 inputs too).
    _, err = expect_code(2, "draw", "--scheme", "sparse", "--nonzero", "40", "--shape", "96x32", "--blocks", "2",
                         "-o", "bad.npy")
    expect("--blocks 2" in err and "gate blocks of [48, 32]" in err and "'nonzero' = 40" in err,
           f"sparse --nonzero 40 on blocks of 32 inputs: {err!r}")

elif CASE == "rate-packed":
    # check --blocks on correct packed draws, 200 seeds at --alpha 0.05: each report is a
    # family of checks at alpha / 3 per block (Bonferroni), so at most 5% of correct
    # weights may fail; we allow 18 of 200 (P(X >= 18) < 0.002 for Binomial(200, 0.05)).
    # Power on the bug --blocks is about: the same weights drawn with the whole tensor's
    # fans (fan-out 144 instead of 48; sd 0.66x) fail in every seed.
    false_alarms, caught = 0, 0
    for seed in range(200):
        for blocks_flag, name in ((["--blocks", "3"], "ok.npy"), ([], "whole.npy")):
            expect_code(0, "draw", "--scheme", "glorot-uniform", "--shape", "144x32", *blocks_flag, "--seed", str(seed),
                        "--name", "gru.w_ih", "-o", name)
        false_alarms += run("check", "ok.npy", "--blocks", "3", "--expect", "glorot-uniform", "--alpha", "0.05")[0] == 1
        caught += run("check", "whole.npy", "--blocks", "3", "--expect", "glorot-uniform", "--alpha", "0.05")[0] == 1
    print(f"check --blocks 3 at alpha 0.05: {false_alarms} false alarms in 200 correct draws, "
          f"{caught} of 200 whole-tensor-fan draws caught")
    expect(false_alarms <= 18, f"{false_alarms} of 200 correct packed draws failed check --blocks at alpha 0.05")
    expect(caught == 200, f"only {caught} of 200 draws with the whole tensor's fans failed check --blocks")

elif CASE == "numpy":
    # NumPy reads every element type we write, and the values are what they should be.
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "512x256", "--seed", "3", "-o", "a32.npy")
    for t in ("f64", "f16", "bf16"):
        expect_code(0, "draw", "--scheme", "he-normal", "--shape", "512x256", "--seed", "3", "--dtype", t,
                    "-o", f"a{t}.npy")
    a32 = np.load("a32.npy")
    expect(a32.dtype == np.dtype("<f4") and a32.shape == (512, 256), f"f32 file read as {a32.dtype} {a32.shape}")
    expect(np.load("af64.npy").dtype == np.dtype("<f8"), "f64 file not read as <f8")
    # f16 and bf16 are computed in float, as f32 is (DEVELOPERS.md), then rounded to nearest
    # even: numpy's own float32 -> float16 cast (IEEE 754) must give the same bits.
    a16 = np.load("af16.npy")
    expect(a16.dtype == np.dtype("<f2"), f"f16 file read as {a16.dtype}")
    expect(np.array_equal(a16.view(np.uint16), a32.astype(np.float16).view(np.uint16)),
           "f16 values are not numpy's rounding of the f32 values")
    ab = np.load("abf16.npy")
    expect(ab.dtype.names == ("bf16",) and ab.dtype["bf16"] == np.dtype("<u2"), f"bf16 file read as {ab.dtype}")
    expect(np.array_equal(ab["bf16"], f32_to_bf16_bits(a32)), "bf16 bits are not the rounded f32 values")
    # He et al. 2015: sd = sqrt(2 / fan_in) = sqrt(2/256); 131072 values give a relative
    # standard error of 1/sqrt(2 * 131072) = 0.2%, so 1% is a 5-sigma band (false alarm
    # rate about 6e-7 over seeds; the seed is fixed).
    sd = float(np.load("af64.npy").std())
    expect(abs(sd / np.sqrt(2 / 256) - 1) < 0.01, f"He normal sd {sd}, expected {np.sqrt(2 / 256)}")
    expect_code(0, "draw", "--scheme", "identity", "--shape", "6x6", "--gain", "2", "-o", "eye.npy")
    expect(np.array_equal(np.load("eye.npy"), 2 * np.eye(6, dtype=np.float32)), "identity is not 2 I")
    expect_code(0, "draw", "--scheme", "constant", "--shape", "3x5", "--value", "0.25", "--dtype", "f64", "-o", "c.npy")
    expect(np.all(np.load("c.npy") == 0.25), "constant is not 0.25 everywhere")
    expect_code(0, "draw", "--scheme", "orthogonal", "--shape", "64x32", "--dtype", "f64", "-o", "q.npy")
    q = np.load("q.npy")
    expect(np.allclose(q.T @ q, np.eye(32), atol=1e-12), "orthogonal columns are not orthonormal")
    # We read what NumPy writes: version 1.0 and 2.0 headers; and refuse what we do not take.
    np.lib.format.write_array(open("v1.npy", "wb"), a32, version=(1, 0))
    np.lib.format.write_array(open("v2.npy", "wb"), a32, version=(2, 0))
    expect_code(0, "check", "v1.npy", "--expect", "he-normal")
    expect_code(0, "check", "v2.npy", "--expect", "he-normal")
    np.save("fortran.npy", np.asfortranarray(a32))
    _, err = expect_code(2, "check", "fortran.npy")
    expect("fortran_order" in err, f"expected fortran_order named, got {err!r}")
    np.save("big.npy", a32.astype(">f4"))
    _, err = expect_code(2, "check", "big.npy")
    expect("big-endian" in err, f"expected big-endian named, got {err!r}")
    np.save("ints.npy", np.arange(6, dtype=np.int32))
    expect_code(2, "check", "ints.npy")
    # bf16 read back by our reader from a file numpy re-wrote
    np.save("bf_numpy.npy", ab)
    expect_code(0, "check", "bf_numpy.npy", "--expect", "he-normal")

elif CASE == "json":
    expect_code(0, "draw", "--scheme", "lecun-uniform", "--shape", "400x300", "-o", "l.npy")
    out, _ = expect_code(0, "check", "l.npy", "--identify", "--json")
    doc = json.loads(out)
    cands = doc["candidates"]
    expect(len(cands) >= 3 and all(set(c) >= {"scheme", "score"} for c in cands), f"bad candidates {cands[:2]}")
    expect(cands[0]["scheme"] == "lecun-uniform" and cands[0]["fan"] == "fan-in", f"best candidate {cands[0]}")
    # best first (audit/identify.hpp): candidates whose variance fits the values, then the
    # rest, each group by KS statistic, so by falling p-value
    fits = [c["variance_fits"] for c in cands]
    expect(fits == sorted(fits, reverse=True), "candidates whose variance fits should come first")
    for group in (True, False):
        s = [c["score"] for c in cands if c["variance_fits"] == group]
        expect(s == sorted(s, reverse=True), f"candidates (variance fits: {group}) not by falling score")
    expect(doc["symmetry"]["passed"] is True, "symmetry should pass")
    out, _ = expect_code(0, "plan", "--json")
    doc = json.loads(out)
    keys = {"index", "fan_in", "fan_out", "scheme", "activation", "weight_std", "forward_variance",
            "backward_variance", "measured_forward_variance", "measured_backward_variance"}
    expect(set(doc) >= {"layers", "warnings"}, f"plan --json top keys {set(doc)}")
    expect(all(set(l) >= keys for l in doc["layers"]), "a layer lacks a key of the issue's list")
    expect(all(l["measured_forward_variance"] is None for l in doc["layers"]), "unmeasured values should be null")
    first = doc["layers"][0]
    # He normal into ReLU from unit-variance inputs: q_1 = fan_in * (2 / fan_in) * 1 = 2 (He et al. 2015)
    expect(abs(first["forward_variance"] - 2.0) < 1e-12, f"q_1 = {first['forward_variance']}, expected 2")
    # drift warnings (mean_field.hpp): Glorot on ReLU halves E[a^2] from the input on (He
    # et al. 2015, eq. 10), flagged at layer 1; a 5-unit head is a change of width, not drift
    with open("glorot_relu.json", "w") as f:
        json.dump({"input": {"width": 64},
                   "layers": [{"width": 64, "activation": "relu", "scheme": "glorot-normal"}] * 8}, f)
    doc = json.loads(expect_code(0, "plan", "glorot_relu.json", "--json")[0])
    expect(any(w.startswith("layer 1 (layer1): forward:") and "vanishes" in w for w in doc["warnings"]),
           f"Glorot on ReLU should be flagged from layer 1, got {doc['warnings']}")
    with open("head.json", "w") as f:
        json.dump({"input": {"width": 32},
                   "layers": [{"width": 32, "activation": "relu", "scheme": "he-normal"}] * 6
                   + [{"width": 5, "activation": "identity", "scheme": "glorot-uniform"}]}, f)
    doc = json.loads(expect_code(0, "plan", "head.json", "--json")[0])
    expect(doc["warnings"] == [], f"a 5-unit head should get no warning, got {doc['warnings']}")
    with open("net.json", "w") as f:
        json.dump({"input": {"width": 100},
                   "layers": [{"width": 200, "activation": "tanh", "scheme": "glorot-normal", "gain": 5 / 3}] * 6
                   + [{"width": 10, "activation": "identity", "scheme": "lecun-normal"}]}, f)
    out, _ = expect_code(0, "plan", "net.json", "--measure", "--batch", "512", "--seed", "5", "--json",
                         "--svg", "net.svg")
    doc = json.loads(out)
    expect(all(isinstance(l["measured_forward_variance"], float) for l in doc["layers"]), "measured values missing")
    # the library's verdict per layer (kindling/propagate/measure.hpp): median and spread
    # over --trials independent draws (16 by default), and the band it was judged by
    expect(doc.get("trials") == 16 and doc.get("false_alarm") == 0.001, f"trials/false_alarm {doc.get('trials')}")
    for l in doc["layers"]:
        for side in ("measured_forward", "measured_backward"):
            m = l.get(side, {})
            expect(set(m) >= {"median", "spread_factor", "mean_over_predicted", "band_factor", "agrees", "draws"}
                   and len(m["draws"]) == 16, f"layer {l['index']} {side}: {m}")
    expect(all(l["agrees"] for l in doc["layers"]), "a Glorot tanh stack should agree at every layer")
    # a belt-fault detector: 1-D convolutions on a 3-channel map, a residual block, a dense
    # head (examples/tool/spec.hpp "conv" and "residual"), measured layer by layer
    with open("belt.json", "w") as f:
        json.dump({"input": {"width": 3, "extent": [48]},
                   "layers": [{"width": 16, "activation": "relu", "scheme": "he-normal",
                               "conv": {"kernel": [5], "padding": "same"}},
                              {"width": 16, "activation": "relu", "scheme": "he-normal",
                               "conv": {"kernel": [3], "stride": [2], "padding": [1], "groups": 4}},
                              {"residual": {"layers": [
                                  {"width": 16, "activation": "relu", "scheme": "he-normal",
                                   "conv": {"kernel": [3], "padding": "same"}},
                                  {"width": 16, "activation": "identity", "scheme": "he-normal",
                                   "conv": {"kernel": [3], "padding": "same"}}],
                                  "scaling": "inverse-sqrt", "blocks": 1}},
                              {"width": 4, "activation": "identity", "scheme": "glorot-uniform"}]}, f)
    doc = json.loads(expect_code(0, "plan", "belt.json", "--measure", "--batch", "32", "--json")[0])
    expect(len(doc["layers"]) == 6 and all(l["agrees"] for l in doc["layers"]),
           f"the belt-fault detector should agree at every layer: {[l.get('agrees') for l in doc['layers']]}")
    with open("belt_bad.json", "w") as f:
        json.dump({"input": {"width": 3, "extent": [4]},
                   "layers": [{"width": 8, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [7]}}]}, f)
    _, err = expect_code(2, "plan", "belt_bad.json")
    expect("layers[0].conv.kernel" in err and "fits the padded input, 4" in err,
           f"expected the kernel's key and reason in the plan error, got {err!r}")
    # a GRU on the 1-D map (kindling/io/spec.hpp "recurrent"): measured, its gates judged at
    # every step, the head predicted from the measured state; bad cells are exit 2 by key
    with open("belt_gru.json", "w") as f:
        json.dump({"input": {"width": 3, "extent": [40]},
                   "layers": [{"width": 8, "activation": "relu", "scheme": "he-normal",
                               "conv": {"kernel": [5], "padding": "same"}},
                              {"recurrent": {"cell": "gru", "hidden": 16}, "label": "memory"},
                              {"width": 4, "activation": "identity", "scheme": "glorot-uniform"}]}, f)
    doc = json.loads(expect_code(0, "plan", "belt_gru.json", "--measure", "--batch", "16", "--trials", "4",
                                 "--json")[0])
    cell = [l for l in doc["layers"] if l.get("kind") == "recurrent"]
    expect(len(doc["layers"]) == 3 and len(cell) == 1 and cell[0]["steps"] == 40 and cell[0]["gates_agree"]
           and cell[0]["fan_in"] == 8 and 0 < cell[0]["state_variance_measured"] < 1,
           f"the GRU row: {cell}")
    for key, value, expected in (("steps", 0, "'layers[1].recurrent.steps' = 0"),
                                 ("hidden", 0, "'layers[1].recurrent.hidden' = 0"),
                                 ("cell", "elman", "'layers[1].recurrent.cell' = \"elman\"")):
        bad = {"input": {"width": 3}, "layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"},
                                                 {"recurrent": {"cell": "gru", "hidden": 8, "steps": 5}}]}
        bad["layers"][1]["recurrent"][key] = value
        with open("bad_cell.json", "w") as f:
            json.dump(bad, f)
        _, err = expect_code(2, "plan", "bad_cell.json")
        expect(expected in err, f"expected {expected!r} in the plan error, got {err!r}")
    # an attention block between 1-D convolutions (kindling/propagate/attention.hpp, the
    # spec key "attention"): its seven rows measured (the projections and scores judged
    # against Var q = d Var W E[x^2] and Var q Var k (1 + 2/(d L)), Vaswani et al. 2017
    # sec. 3.2.1), and the layers above predicted from its measured output moment
    with open("belt_attention.json", "w") as f:
        json.dump({"input": {"width": 3, "extent": [24]},
                   "layers": [{"width": 16, "activation": "relu", "scheme": "he-normal",
                               "conv": {"kernel": [5], "padding": "same"}, "label": "taps"},
                              {"attention": {"heads": 4, "scheme": "glorot-uniform"}, "label": "attend"},
                              {"width": 4, "activation": "identity", "scheme": "glorot-uniform", "label": "head"}]},
                  f)
    out, _ = expect_code(0, "plan", "belt_attention.json", "--measure", "--batch", "16", "--trials", "6",
                         "--json", "--threads", "2")
    doc = json.loads(out)
    rows = [l for l in doc["layers"] if l.get("kind") == "attention"]
    expect([r["part"] for r in rows] == ["query", "key", "value", "score", "softmax", "mix", "output"]
           and [l["label"] for l in doc["layers"]][0] == "taps" and doc["layers"][-1]["label"] == "head",
           f"the attention rows: {[l['label'] for l in doc['layers']]}")
    taps, head = doc["layers"][0], doc["layers"][-1]
    # the block is fed the ReLU output of taps: E[a^2] = q / 2 (He et al. 2015); d = 16, Glorot: Var W = 1/16
    fed = taps["forward_variance"] / 2
    query = rows[0]
    expect(abs(query["input_variance"] - fed) < 1e-12 and abs(query["forward_variance"] - 16 * fed / 16) < 1e-12,
           f"the query row's prediction: {query}")
    score = rows[3]
    expect(abs(score["forward_variance"] - fed * fed * (1 + 2 / (16 * 24))) < 1e-12, f"the score row: {score}")
    expect(all(r["agrees"] for r in rows if "agrees" in r) and "measured_forward" not in rows[4]
           and len(rows[0]["measured_forward"]["draws"]) == 6,
           f"the attention rows should agree (softmax: measured only forward): {rows}")
    # backward from the block's own unit loss gradient (attention.hpp's header): the mix's
    # gradient W_o^T g has d Var W_o = 16 / 16 = 1 (a dense layer's backward pass, common
    # practice); the softmax weights' dL/dp_ij = dL/do_i . v_j has d_k (d Var W_o)(d Var W_v)
    # E[x^2] = 4 x fed; the scores', queries' and keys' gradients are measured only
    mix, softmax = rows[5], rows[4]
    expect(abs(mix["backward_variance"] - 1) < 1e-12 and abs(softmax["backward_variance"] - 4 * fed) < 1e-12
           and rows[3]["backward_variance"] is None
           and rows[3]["measured_only"] == ["measured_backward_variance"]
           and len(mix["measured_backward"]["draws"]) == 6 and mix["measured_backward"]["agrees"]
           and softmax["agrees"] is True and rows[2]["measured_backward"]["agrees"],
           f"the attention rows' backward predictions and verdicts: {rows}")
    # the head reads the 16 x 24 map above the block: fan_in 384, fed the measured output moment
    expect(head["fan_in"] == 384 and head.get("agrees") is True, f"the head above the block: {head}")
    output = rows[6]["measured_forward_variance"]
    expect(abs(head["forward_variance"] - output * 384 * 2 / (384 + 4)) < 1e-9 * output,
           f"the head's prediction should start from the block's measured output {output}: {head}")
    same = expect_code(0, "plan", "belt_attention.json", "--measure", "--batch", "16", "--trials", "6", "--json")[0]
    expect(json.loads(same) == doc, "plan with an attention block should give the same numbers on 1 and 2 threads")
    text = expect_code(0, "plan", "belt_attention.json")[0]
    expect("attend.softmax" in text and "measured only: softmax" in text, f"the attention rows in the table: {text}")
    # --measure: the stack below the block (row 1) and the one above it (row 9) each say how
    # they were judged, and the table's false-alarm budget is the sum over its three parts
    # (two stacks and the block, 0.001 each: Bonferroni)
    text = expect_code(0, "plan", "belt_attention.json", "--measure", "--batch", "16", "--trials", "6")[0]
    # the columns of the library's tables (propagation_report::table, attention_report::table)
    columns = ["#", "layer", "fan_in", "fan_out", "activation", "scheme", "weight_sd", "fwd_var", "bwd_var",
               "fwd_med", "x/", "bwd_med", "x/", "agrees"]
    expect(text.splitlines()[1].split() == columns, f"plan --measure's columns: {text.splitlines()[1]!r}")
    expect("rows 1: " in text and "rows 9: " in text and "false alarm <= 0.001 for these rows" in text
           and "the whole table: false alarm <= 0.003" in text, f"the method lines of a cut table: {text}")
    _, err = expect_code(2, "plan", "belt_attention.json", "--batch", "100000000")
    expect("--batch 100000000" in err and "attention block 'attend'" in err,
           f"expected the memory refusal to name --batch and the block: {err!r}")
    svg = ET.parse("net.svg").getroot()
    texts = " ".join(t.text or "" for t in svg.iter("{http://www.w3.org/2000/svg}text"))
    for word in ("layer (depth)", "variance (log scale)", "predicted", "measured"):
        expect(word in texts, f"the SVG lacks the text {word!r}")
    expect(len(list(svg.iter("{http://www.w3.org/2000/svg}circle"))) >= 14, "the SVG lacks the measured points")
    expect("layer1" in texts and "layer7" in texts, "the SVG's depth axis lacks the layer names")
    expect(not any(t.get("class") == "warns" for t in svg.iter("{http://www.w3.org/2000/svg}text")),
           "a stack that agrees everywhere, without warnings, got a warned layer in the SVG")
    # Glorot on ReLU warns from layer 1 (above): its name is marked in the SVG
    expect_code(0, "plan", "glorot_relu.json", "--svg", "glorot_relu.svg")
    marked = [t.text for t in ET.parse("glorot_relu.svg").getroot().iter("{http://www.w3.org/2000/svg}text")
              if t.get("class") == "warns"]
    expect(marked and marked[0] == "layer1 !", f"the SVG should mark layer1 as warning, marked {marked}")
elif CASE == "outputs":
    def npy_shape(path):
        try:
            return np.load(path).shape
        except (OSError, ValueError) as e:
            return f"unreadable ({e})"

    # Outputs go through an exclusive temporary file with a random name and an atomic
    # rename (kindling/io/replace_file.hpp): nothing planted beside the output is
    # followed or consumed, links are written through, odd files are refused.
    with open("victim.txt", "w") as f:
        f.write("victim")
    for stale in ("out.npy.kindling-partial",):
        if os.path.lexists(stale):
            os.remove(stale)
    os.symlink("victim.txt", "out.npy.kindling-partial")       # the old fixed temporary name
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "8x4", "-o", "out.npy")
    expect(open("victim.txt", "rb").read() == b"victim", "draw wrote through a link planted beside the output")
    expect(os.path.islink("out.npy.kindling-partial"), "draw consumed a file planted beside the output")
    expect(not os.path.islink("out.npy") and npy_shape("out.npy") == (8, 4), "out.npy is not the new file")
    # a symlinked output is written through: the link stays, its target gets the values and keeps its mode
    with open("real.npy", "wb") as f:
        f.write(b"old")
    os.chmod("real.npy", 0o640)
    if os.path.lexists("link.npy"):
        os.remove("link.npy")
    os.symlink("real.npy", "link.npy")
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "8x4", "-o", "link.npy")
    expect(os.path.islink("link.npy"), "a symlinked output was replaced by a file")
    expect(npy_shape("real.npy") == (8, 4), "the link's target does not hold the new values")
    expect(os.stat("real.npy").st_mode & 0o777 == 0o640, f"mode {oct(os.stat('real.npy').st_mode)} not kept")
    # a 254-byte name (NAME_MAX is 255): the temporary name is shortened, not refused
    long_name = "p" * 250 + ".npy"
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "8x4", "-o", long_name)
    expect(os.path.exists(long_name), "the 254-byte output was not written")
    # a directory or a FIFO is refused, naming the option, the path and the reason
    os.makedirs("adir", exist_ok=True)
    _, err = expect_code(2, "draw", "--scheme", "he-normal", "--shape", "8x4", "-o", "adir")
    expect("-o 'adir'" in err and "directory" in err and "rename failed" not in err, f"directory output: {err!r}")
    if not os.path.exists("afifo"):
        os.mkfifo("afifo")
    p = subprocess.run([KINDLING, "draw", "--scheme", "he-normal", "--shape", "8x4", "-o", "afifo"],
                       capture_output=True, text=True, timeout=60)
    expect(p.returncode == 2 and "FIFO" in p.stderr, f"FIFO output: exit {p.returncode}, {p.stderr!r}")
    expect(os.path.exists("afifo") and not os.path.isfile("afifo"), "the FIFO was replaced by a file")
    # an output that is the input: refused, by name and through a hard link
    spec = '{"input": {"width": 8}, "layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}]}'
    with open("spec.json", "w") as f:
        f.write(spec)
    if os.path.exists("alias.json"):
        os.remove("alias.json")
    os.link("spec.json", "alias.json")
    for svg in ("spec.json", "alias.json"):
        _, err = expect_code(2, "plan", "spec.json", "--svg", svg)
        expect("--svg" in err and "SPEC" in err, f"--svg {svg} over the spec: {err!r}")
    expect(open("spec.json").read() == spec, "plan overwrote its own spec")
    # a write that fails part way (a file size limit) leaves the old file and no temporary,
    # and says why, with the option and the path
    import resource
    import signal

    def small_files():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (1000, 1000))
    with open("keep.npy", "wb") as f:
        f.write(b"precious")
    before = set(os.listdir("."))
    p = subprocess.run([KINDLING, "draw", "--scheme", "he-normal", "--shape", "64x64", "-o", "keep.npy"],
                       capture_output=True, text=True, preexec_fn=small_files)
    expect(p.returncode == 2 and "-o 'keep.npy'" in p.stderr and os.strerror(27) in p.stderr,
           f"a failed write: exit {p.returncode}, {p.stderr!r}")
    expect(open("keep.npy", "rb").read() == b"precious", "a failed write changed the existing file")
    expect(set(os.listdir(".")) == before, f"a failed write left {set(os.listdir('.')) - before}")
    # two writers at once: each succeeds, and the file is one of the two, complete
    for seed in ("1", "2"):
        expect_code(0, "draw", "--scheme", "he-normal", "--shape", "512x512", "--seed", seed, "-o", f"ref{seed}.npy")
    refs = [open(f"ref{seed}.npy", "rb").read() for seed in ("1", "2")]
    for _ in range(4):
        procs = [subprocess.Popen([KINDLING, "draw", "--scheme", "he-normal", "--shape", "512x512", "--seed", seed,
                                   "-o", "both.npy"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
                 for seed in ("1", "2")]
        codes = [p.wait() for p in procs]
        expect(codes == [0, 0], f"concurrent writers exited {codes}")
        expect(open("both.npy", "rb").read() in refs, "concurrent writers left a file that is neither run's")
    leftovers = [n for n in os.listdir(".") if n.endswith(".kindling-tmp")]
    expect(not leftovers, f"temporary files left behind: {leftovers}")

elif CASE == "numbers":
    # Integer options are parsed by the tool: negatives, overflow, empty text and junk are
    # bad input naming the option and the value (CLI11 wrapped or clamped them).
    draw = ["draw", "--scheme", "he-normal", "--shape", "4x4", "-o", "n.npy"]
    for option, value in (("--seed", "-1"), ("--seed", "18446744073709551616"), ("--seed", "99999999999999999999"),
                          ("--seed", ""), ("--seed", "2^64"), ("--seed", "12abc"), ("--fan-in", "-1"),
                          ("--fan-out", "1e3"), ("--threads", "-1")):
        _, err = expect_code(2, *draw, option, value)
        expect(f"{option} '{value}'" in err and "expected" in err, f"{option} {value!r}: {err!r}")
    _, err = expect_code(2, "draw", "--scheme", "sparse", "--shape", "4x4", "--nonzero", "-3", "-o", "n.npy")
    expect("--nonzero '-3'" in err, f"--nonzero -3: {err!r}")
    for option, value in (("--batch", "-1"), ("--batch", "x"), ("--seed", "-1"), ("--threads", "")):
        _, err = expect_code(2, "plan", "--measure", option, value)
        expect(f"{option} '{value}'" in err, f"plan {option} {value!r}: {err!r}")
    _, err = expect_code(2, *draw, "--region", "")
    expect("--region ''" in err, f"--region '': {err!r}")
    # values that do not fit the element type
    for args, option in ((["--scheme", "constant", "--value", "1e300"], "--value"),
                         (["--scheme", "constant", "--value", "70000", "--dtype", "f16"], "--value"),
                         (["--scheme", "orthogonal", "--gain", "1e300"], "--gain")):
        _, err = expect_code(2, "draw", *args, "--shape", "4x4", "-o", "n.npy")
        expect(option in err and "--dtype" in err, f"{args}: {err!r}")
    expect(not os.path.exists("n.npy"), "a refused draw wrote n.npy")

elif CASE == "limits":
    # Readers stop at what an input may legitimately need; sizes are estimated before
    # memory is allocated, naming the option.
    for args, name in ((["check", "/dev/zero"], "FILE '/dev/zero'"), (["plan", "/dev/zero"], "SPEC '/dev/zero'")):
        try:
            p = subprocess.run([KINDLING, *args], capture_output=True, text=True, timeout=60)
            expect(p.returncode == 2 and name in p.stderr and "bad_alloc" not in p.stderr, f"{args}: {p.stderr!r}")
        except subprocess.TimeoutExpired:
            failures.append(f"{args}: still reading after 60 s")
    os.makedirs("adir", exist_ok=True)
    for args, name in ((["check", "adir"], "FILE 'adir'"), (["plan", "adir"], "SPEC 'adir'")):
        _, err = expect_code(2, *args)
        expect(name in err and "directory" in err and "basic_filebuf" not in err, f"{args}: {err!r}")
    with open("deep.json", "w") as f:
        f.write('{"input": ' + "[" * 200000 + "]" * 200000 + "}")
    _, err = expect_code(2, "plan", "deep.json")
    expect("nested deeper" in err, f"a deeply nested spec: {err!r}")
    with open("huge.json", "w") as f:
        f.write(" " * (2 << 20) + '{"input": {"width": 8}, "layers": []}')
    _, err = expect_code(2, "plan", "huge.json")
    expect("SPEC 'huge.json'" in err and "MiB" in err, f"a 2 MiB spec: {err!r}")
    _, err = expect_code(2, "draw", "--scheme", "he-normal", "--shape", "65536x65536", "-o", "big.npy")
    expect("--shape 65536x65536" in err and "memory" in err, f"--shape 65536x65536: {err!r}")
    # structured schemes on a tiny region: orthogonal refuses the whole factorization a
    # region would cost; sparse draws only the region's unit (quick even for 2^21 nonzeros)
    _, err = expect_code(2, "draw", "--scheme", "orthogonal", "--shape", "16384x16384", "--region", "0:1,0:1",
                         "-o", "o.npy")
    expect("[16384, 16384]" in err and "16384 x 16384 factorization" in err and "2^26" in err,
           f"orthogonal on a one-element region: {err!r}")
    try:
        p = subprocess.run([KINDLING, "draw", "--scheme", "sparse", "--shape", "2x4194304", "--nonzero", "2097152",
                            "--region", "1:2,5:6", "-o", "s.npy"], capture_output=True, text=True, timeout=60)
        expect(p.returncode == 0, f"sparse --nonzero 2^21 on one element: {p.stderr!r}")
    except subprocess.TimeoutExpired:
        failures.append("sparse --nonzero 2^21 on one element: still drawing after 60 s")
    _, err = expect_code(2, "draw", "--scheme", "sparse", "--shape", "8x16", "--fan-in", "4", "-o", "s.npy")
    expect("--fan-in 4 does not apply to scheme 'sparse'" in err and "expected --fan-in 16" in err,
           f"sparse with a --fan-in override: {err!r}")
    _, err = expect_code(2, "plan", "--measure", "--batch", "4294967296")
    expect("--batch 4294967296" in err and "memory" in err, f"--batch 2^32: {err!r}")
    # a header announcing more data than check may hold is refused before reading the data
    with open("wide.npy", "wb") as f:
        header = "{'descr': '<f8', 'fortran_order': False, 'shape': (1073741824, 4), }"
        header += " " * ((64 - (10 + len(header) + 1) % 64) % 64) + "\n"
        f.write(b"\x93NUMPY\x01\x00" + len(header).to_bytes(2, "little") + header.encode())
    _, err = expect_code(2, "check", "wide.npy")
    expect("4294967296 elements" in err and "at most" in err, f"a header of 2^32 elements: {err!r}")

elif CASE == "messages":
    # Messages name the user's option or key, never an internal parameter.
    _, err = expect_code(2, "draw", "--scheme", "he-normal", "--shape", "4x4", "--gain", "1e200", "-o", "m.npy")
    expect("--gain" in err and "scale" not in err, f"--gain 1e200: {err!r}")
    with open("g.json", "w") as f:
        f.write('{"input": {"width": 8}, "layers": [{"width": 4, "activation": "relu", "scheme": "he-normal",'
                ' "gain": 1e200}]}')
    _, err = expect_code(2, "plan", "g.json")
    expect("layers[0].gain" in err and "weight_variance" not in err, f"a spec gain of 1e200: {err!r}")
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "16x8", "-o", "m.npy")
    out, err = expect_code(2, "check", "m.npy", "--expect", "he-normal", "--gain", "1e200")
    expect(out == "" and "--gain" in err, f"check --gain 1e200 printed {out!r} before failing: {err!r}")
    with open("ctl.json", "w") as f:
        f.write('{"name": "heat exchanger\\u0001", "input": {"width": 8}, "layers": [{"width": 4, '
                '"activation": "tanh", "scheme": "glorot-normal", "label": "fin\\u0007\\u001b"}]}')
    expect_code(0, "plan", "ctl.json", "--svg", "ctl.svg")
    try:
        ET.parse("ctl.svg")
    except ET.ParseError as e:
        failures.append(f"a control character in a spec name made malformed SVG: {e}")
elif CASE == "rate-4096":
    # The tool's own correct draws pass its own check at 4096 x 4096 in every element type
    # (a bf16 tensor holds a few thousand distinct values; the check tests against the
    # declared distribution rounded to bf16, so it must not reject them), and a fan off
    # by 1.1 fails. --alpha is the false-alarm rate the user accepts.
    for dtype in ("f32", "f64", "f16", "bf16"):
        for scheme in ("he-normal", "glorot-uniform"):
            expect_code(0, "draw", "--scheme", scheme, "--shape", "4096x4096", "--dtype", dtype, "--seed", "1",
                        "-o", "big.npy")
            out, _ = expect_code(0, "check", "big.npy", "--expect", scheme)
            expect("ks passed" in out and "accepted D <=" in out, f"{dtype} {scheme}: check lines {out!r}")
        expect_code(1, "check", "big.npy", "--expect", "glorot-uniform", "--fan-in", "4506", "--fan-out", "4506")
    out, _ = expect_code(0, "check", "big.npy", "--expect", "glorot-uniform", "--alpha", "0.05", "--json")
    report = json.loads(out)
    ks = [f for f in report["expect"]["findings"] if f["check"] == "ks"][0]
    expect(ks["interval"][0] == 0 and ks["statistic"] <= ks["interval"][1] and 0.0 <= ks["p_value"] <= 1.0,
           f"--json ks finding {ks}")
    expect_code(2, "check", "big.npy", "--expect", "glorot-uniform", "--alpha", "1.5")
elif CASE == "batch":
    # The issue: plan --measure --batch 30000 built a batch x batch matrix (7.7 GB, 8
    # minutes). Each draw now streams its batch in slices of 32 samples, so the peak
    # memory does not depend on --batch. Two draws keep the run short; the pump's
    # weights and one slice take a few MB, 30000^2 doubles would be 7.2 GB.
    import resource
    # Under AddressSanitizer (the sanitize preset) freed blocks wait in a quarantine of
    # 256 MB before reuse, which measures the sanitizer, not the streaming: keep it small.
    # Builds without ASan ignore the variable.
    os.environ["ASAN_OPTIONS"] = ":".join(
        o for o in (os.environ.get("ASAN_OPTIONS", ""), "quarantine_size_mb=8") if o)
    out, _ = expect_code(0, "plan", "--measure", "--batch", "30000", "--trials", "2", "--json")
    expect(json.loads(out).get("batch") == 30000, "the JSON should say batch 30000")
    # the largest resident set of any child of this script (only that run), kB on Linux
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    print(f"plan --measure --batch 30000 --trials 2: peak resident memory {peak} kB")
    expect(peak < 200 * 1024, f"plan --measure --batch 30000 peaked at {peak} kB, expected < 200 MB")
else:
    failures.append(f"unknown case {CASE}")

for f in failures:
    print("FAIL:", f)
print(f"{CASE}: {len(failures)} failures")
sys.exit(1 if failures else 0)
