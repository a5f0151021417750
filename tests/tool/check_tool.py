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
        expect(not os.path.exists("keep.npy.kindling-partial"), "a temporary file was left behind")
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
    # the thread count does not change a value
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "700x500", "--threads", "1", "-o", "t1.npy")
    expect_code(0, "draw", "--scheme", "he-normal", "--shape", "700x500", "--threads", "2", "-o", "t2.npy")
    expect(np.load("t1.npy").tobytes() == np.load("t2.npy").tobytes(), "values changed with --threads")

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
    svg = ET.parse("net.svg").getroot()
    texts = " ".join(t.text or "" for t in svg.iter("{http://www.w3.org/2000/svg}text"))
    for word in ("layer (depth)", "variance (log scale)", "predicted", "measured"):
        expect(word in texts, f"the SVG lacks the text {word!r}")
    expect(len(list(svg.iter("{http://www.w3.org/2000/svg}circle"))) >= 14, "the SVG lacks the measured points")
elif CASE == "batch":
    # The issue: plan --measure --batch 30000 built a batch x batch matrix (7.7 GB, 8
    # minutes). Each draw now streams its batch in slices of 32 samples, so the peak
    # memory does not depend on --batch. Two draws keep the run short; the pump's
    # weights and one slice take a few MB, 30000^2 doubles would be 7.2 GB.
    import resource
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
