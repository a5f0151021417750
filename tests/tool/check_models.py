"""Whole models through the `kindling` tool, checked from outside with NumPy.

Usage: check_models.py KINDLING SOURCE_DIR WORK_DIR

- `kindling assemble` writes examples/models/conveyor_belt.json to a safetensors file;
  we read it with struct, json and np.frombuffer only (the safetensors layout as we
  remember its public specification: u64 little-endian header length, JSON header with
  dtype / shape / data_offsets, raw little-endian data) and compare the values with
  `kindling draw` of the same parameter read by np.load, and with properties NumPy
  computes itself: orthogonal GRU gate blocks (Q Q^T = I), the Glorot bound
  sqrt(6 / (fan_in + fan_out)) (Glorot & Bengio 2010, eq. 16), a constant bias.
- We write a safetensors file of our own (other key order, reversed data order, no
  padding) from those arrays; `kindling verify` accepts it against the manifest, and
  refuses it (exit 1, naming the tensor) once one byte is flipped.
- Bad input is exit 2 naming the key: a plan with a repeated name, a manifest of
  another format version.
"""
import json
import os
import shutil
import struct
import subprocess
import sys

import numpy as np

KINDLING, SOURCE, WORK = sys.argv[1], sys.argv[2], sys.argv[3]
shutil.rmtree(WORK, ignore_errors=True)
os.makedirs(WORK)
os.chdir(WORK)
PLAN = os.path.join(SOURCE, "examples", "models", "conveyor_belt.json")
failures = []


def run(*args):
    p = subprocess.run([KINDLING, *args], capture_output=True, text=True, timeout=120)
    return p.returncode, p.stdout, p.stderr


def expect(cond, what):
    if not cond:
        failures.append(what)


DTYPES = {"F32": np.float32, "F64": np.float64, "F16": np.float16, "BF16": np.uint16}


def read_safetensors(path):
    with open(path, "rb") as f:
        raw = f.read()
    (n,) = struct.unpack("<Q", raw[:8])
    header = json.loads(raw[8:8 + n])
    data = raw[8 + n:]
    out = {}
    for name, t in header.items():
        if name == "__metadata__":
            continue
        b, e = t["data_offsets"]
        a = np.frombuffer(data[b:e], dtype=np.dtype(DTYPES[t["dtype"]]).newbyteorder("<"))
        out[name] = (t["dtype"], a.reshape(t["shape"]))
    return out


def as_float(dtype, a):
    if dtype == "BF16":  # bfloat16 is the top half of a float32
        return (a.astype(np.uint32) << 16).view(np.float32).astype(np.float64)
    return a.astype(np.float64)


def write_safetensors(path, tensors):
    header, chunks, at = {}, [], 0
    for name, (dtype, a) in reversed(list(tensors.items())):
        raw = np.ascontiguousarray(a).astype(np.dtype(a.dtype).newbyteorder("<")).tobytes()
        header[name] = {"shape": list(a.shape), "data_offsets": [at, at + len(raw)], "dtype": dtype}
        chunks.append(raw)
        at += len(raw)
    text = json.dumps(header).encode()
    with open(path, "wb") as f:
        f.write(struct.pack("<Q", len(text)) + text + b"".join(chunks))


code, out, err = run("assemble", PLAN, "-o", "belt.safetensors", "--manifest", "belt.json")
expect(code == 0, f"assemble: exit {code}, {err!r}")
plan = json.load(open(PLAN))
manifest = json.load(open("belt.json"))
seed = str(plan["seed"])
t = read_safetensors("belt.safetensors")
expect(list(t) and set(t) == {p["name"] for p in plan["parameters"]}, f"tensor names {sorted(t)}")

# Non-packed parameters equal `kindling draw` of the same parameter, read by np.load.
draws = {"front.conv1.weight": ["--scheme", "he-normal", "--shape", "16x3x7", "--dtype", "f32"],
         "front.conv2.weight": ["--scheme", "he-normal", "--shape", "32x8x5", "--fan-in", "40", "--fan-out", "80",
                                "--dtype", "f32"],
         "head.weight": ["--scheme", "glorot-uniform", "--shape", "4x48", "--dtype", "f64"]}
for name, args in draws.items():
    code, _, err = run("draw", *args, "--seed", seed, "--name", name, "-o", "d.npy")
    expect(code == 0, f"draw {name}: {err!r}")
    expect(np.array_equal(np.load("d.npy"), t[name][1]), f"{name}: safetensors values differ from kindling draw")

# The GRU's recurrent gate blocks are each orthogonal (48 x 48 f32).
w_hh = as_float(*t["gru.w_hh"])
for b in range(3):
    q = w_hh[48 * b:48 * (b + 1)]
    expect(np.abs(q @ q.T - np.eye(48)).max() < 1e-5, f"gru.w_hh block {b} is not orthogonal")
expect(not np.allclose(w_hh[:48], w_hh[48:96]), "gru.w_hh blocks are equal")
# Input gate blocks: Glorot uniform with each block's own fans (32 in, 48 out).
w_ih = as_float(*t["gru.w_ih"])
bound = np.sqrt(6 / (32 + 48))
expect(np.abs(w_ih).max() <= bound and np.abs(w_ih).max() > 0.9 * bound, f"gru.w_ih max {np.abs(w_ih).max()} vs {bound}")
expect(abs(w_ih.std() - bound / np.sqrt(3)) < 0.05 * bound, f"gru.w_ih std {w_ih.std()}")
expect(manifest["parameters"][4]["distribution"]["bound"] == float(bound) or
       abs(manifest["parameters"][4]["distribution"]["bound"] - bound) < 1e-15, "manifest bound of gru.w_ih")
expect(np.all(as_float(*t["head.bias"]) == -2.5) and t["head.bias"][0] == "F16", "head.bias is not f16 -2.5")
expect(np.all(as_float(*t["gru.b_ih"]) == 0), "gru.b_ih is not zero")

# A file NumPy's side wrote passes verify; one flipped byte fails it, naming the tensor.
write_safetensors("ours.safetensors", {k: v for k, v in t.items()})
code, out, err = run("verify", "ours.safetensors", "--manifest", "belt.json")
expect(code == 0 and "all 9 tensors match" in out, f"verify of our file: exit {code}, {out!r} {err!r}")
flipped = dict(t)
a = flipped["gru.w_hh"][1].copy()
a.view(np.uint8).reshape(-1)[1001] ^= 0x10  # a byte of block 0
flipped["gru.w_hh"] = ("F32", a)
write_safetensors("flipped.safetensors", flipped)
code, out, err = run("verify", "flipped.safetensors", "--manifest", "belt.json")
expect(code == 1 and "FAILED   gru.w_hh" in out and "FAILED   front" not in out,
       f"verify of a flipped byte: exit {code}, {out!r} {err!r}")

# Bad input: exit 2, naming the key; nothing written.
bad = json.loads(json.dumps(plan))
bad["parameters"][3]["name"] = "front.conv1.bias"
json.dump(bad, open("dup.json", "w"))
code, _, err = run("assemble", "dup.json", "-o", "dup.safetensors")
expect(code == 2 and "parameters[3].name" in err and "front.conv1.bias" in err, f"duplicate name: {code} {err!r}")
expect(not os.path.exists("dup.safetensors"), "a bad plan wrote a file")
m = json.load(open("belt.json"))
m["format_version"] = 99
json.dump(m, open("v99.json", "w"))
code, _, err = run("verify", "belt.safetensors", "--manifest", "v99.json")
expect(code == 2 and "'format_version' = 99" in err, f"manifest version 99: {code} {err!r}")
with open("short.safetensors", "wb") as f:
    f.write(struct.pack("<Q", 1000) + b"{}")
code, _, err = run("verify", "short.safetensors", "--manifest", "belt.json")
expect(code == 2 and "header length 1000 runs past the end" in err, f"a short file: {code} {err!r}")

if failures:
    print("\n".join(failures))
    sys.exit(1)
print("ok")
