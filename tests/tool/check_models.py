"""Whole models through the `kindling` tool, checked from outside with NumPy.

Usage: check_models.py KINDLING SOURCE_DIR WORK_DIR [pump]

With "pump", examples/models/pump.json instead goes through check_plan_round_trip: built
into safetensors and npz with a manifest, read by NumPy, each tensor equal to `kindling
draw` of it (packed gates with --blocks), audited against plan and manifest, regenerated
from the manifest bit for bit, and a flipped byte in each tensor caught by name.

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
- The same plan written with name-pattern rules (examples/models/conveyor_belt_rules.json)
  gives the same manifest, digests included.
- .npz (a zip of .npy members, PKWARE's APPNOTE): `kindling assemble -o x.npz`, stored and
  --compress (deflated), read by np.load with the same values as the safetensors file;
  files written by np.savez and np.savez_compressed pass `kindling verify` and `kindling
  audit`; an archive whose sizes lie, a truncated central directory and a member that is
  not .npy are exit 2 naming what is wrong.
- `kindling audit`: the correct checkpoint passes (Bonferroni over the statistical
  reports, said in the output); one tensor drawn with the wrong fan fails, named; --json;
  --threads gives the same bytes (assemble) and the same table (audit); the progress line
  appears on a terminal only; a tensor over 128 MiB (audited mapped from the file, the
  others read into a buffer) is read right, changed values near its end caught.
"""
import hashlib
import json
import os
import pty
import shutil
import struct
import subprocess
import sys
import zipfile

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


def npz_values(path):
    """np.load's arrays as (dtype name, array), bf16 members as their bit patterns."""
    out = {}
    with np.load(path) as z:
        for k in z.files:
            a = z[k]
            if a.dtype.names == ("bf16",):
                out[k] = ("BF16", a["bf16"])
            else:
                out[k] = ({"float16": "F16", "float32": "F32", "float64": "F64"}[a.dtype.name], a)
    return out



def finish():
    if failures:
        print("\n".join(failures))
        sys.exit(1)
    print("ok")
    sys.exit(0)


def draw_args(record):
    """`kindling draw` options that give the parameter a manifest record describes,
    packed gate blocks included (--blocks)."""
    layer = record["layer"]
    args = ["--scheme", record["scheme_arguments"]["name"], "--shape", "x".join(map(str, record["shape"])),
            "--dtype", record["dtype"]]
    flags = {"gain": "--gain", "std": "--std", "value": "--value", "nonzero": "--nonzero"}
    for key, value in record["scheme_arguments"].items():
        if key == "slope" and value == 0.0:
            continue  # He's leaky-ReLU slope: draw has no option for it and uses 0
        if key != "name":
            args += [flags[key], repr(value) if key != "nonzero" else str(int(value))]
    kind = layer["kind"]
    if layer.get("layout") == "in_out":
        args += ["--layout", "io"]
    if kind == "packed":
        args += ["--blocks", str(layer["blocks"])]
    elif kind in ("convolution", "transposed_convolution") and layer.get("groups", 1) != 1:
        args += ["--fan-in", str(record["fans"]["in"]), "--fan-out", str(record["fans"]["out"])]
    return args


def check_plan_round_trip(plan_path, stem):
    """A plan through the tool and back: assembled into safetensors and npz with a manifest,
    both read by NumPy with the same values, every tensor equal to `kindling draw` of that
    parameter (the per-tensor C++ path), audited against the plan and the manifest,
    regenerated from the manifest alone bit for bit, and a flipped byte caught by name."""
    plan = json.load(open(plan_path))
    names = [p["name"] for p in plan["parameters"]]
    n = len(names)
    st, npz, manifest_path = f"{stem}.safetensors", f"{stem}.npz", f"{stem}.manifest.json"
    code, _, err = run("assemble", plan_path, "-o", st, "--manifest", manifest_path)
    expect(code == 0, f"assemble {stem}: exit {code}, {err!r}")
    code, _, err = run("assemble", plan_path, "-o", npz, "--manifest", f"{stem}.npz.manifest.json", "--compress")
    expect(code == 0, f"assemble {stem}.npz: exit {code}, {err!r}")
    manifest = json.load(open(manifest_path))
    t, z = read_safetensors(st), npz_values(npz)
    expect(sorted(t) == sorted(names) and sorted(z) == sorted(names), f"{stem}: tensor names {list(t)}, {sorted(z)}")
    for r in manifest["parameters"]:
        name = r["name"]
        dtype, a = t[name]
        expect(z[name][0] == dtype and z[name][1].tobytes() == a.tobytes() and list(a.shape) == r["shape"],
               f"{stem}: np.load of the npz and np.frombuffer of the safetensors differ for {name}")
        code, _, err = run("draw", *draw_args(r), "--seed", str(manifest["seed"]), "--name", name, "-o", "one.npy")
        d = np.load("one.npy") if code == 0 else None
        if d is not None and d.dtype.names == ("bf16",):
            d = d["bf16"]
        expect(code == 0 and d.shape == a.shape and d.tobytes() == a.tobytes(),
               f"{stem}: {name} differs from kindling draw {' '.join(draw_args(r))} ({code} {err!r})")
        # Per-gate fans: each block of a packed fan-scaled uniform weight stays inside the
        # bound the manifest records for its block, and comes close to it.
        if r["layer"]["kind"] == "packed" and r["distribution"]["kind"] == "uniform":
            blocks, bound = r["layer"]["blocks"], r["distribution"]["bound"]
            for b, block in enumerate(np.split(as_float(dtype, a), blocks, axis=0)):
                expect(np.abs(block).max() < bound and np.abs(block).max() > 0.9 * bound,
                       f"{stem}: {name} block {b} max {np.abs(block).max()} vs its bound {bound}")
    for flag, path in (("--plan", plan_path), ("--manifest", manifest_path)):
        for f in (st, npz):
            code, out, err = run("audit", f, flag, path)
            expect(code == 0 and f"all {n} tensors passed" in out, f"audit {f} {flag}: {code} {out!r} {err!r}")
    code, out, err = run("verify", npz, "--manifest", manifest_path)
    expect(code == 0 and f"all {n} tensors match" in out, f"verify {npz}: {code} {out!r} {err!r}")
    # Regenerated from the manifest alone: the same file, byte for byte, and the same manifest.
    code, _, err = run("assemble", manifest_path, "-o", f"{stem}_again.safetensors", "--manifest", f"{stem}_again.json")
    expect(code == 0 and open(f"{stem}_again.safetensors", "rb").read() == open(st, "rb").read(),
           f"{stem}: the checkpoint regenerated from its manifest differs ({code} {err!r})")
    expect(code == 0 and json.load(open(f"{stem}_again.json")) == manifest, f"{stem}: the regenerated manifest differs")
    for key, value, words in (("format_version", 99, "'format_version' = 99"),
                              ("format", "kindling-notes", "expected \"kindling-model-plan\" or \"kindling-manifest\"")):
        bad = dict(manifest, **{key: value})
        json.dump(bad, open("bad_manifest.json", "w"))
        code, _, err = run("assemble", "bad_manifest.json", "-o", "bad.safetensors")
        expect(code == 2 and words in err and not os.path.exists("bad.safetensors"),
               f"{stem}: assemble of a manifest with {key} {value!r}: {code} {err!r}")
    # One flipped byte in each tensor in turn fails the exact verification, naming it alone.
    for name in names:
        flipped = dict(t)
        dtype, a = t[name]
        a = a.copy()
        a.view(np.uint8).reshape(-1)[a.nbytes // 2] ^= 0x01
        flipped[name] = (dtype, a)
        write_safetensors("flipped.safetensors", flipped)
        code, out, err = run("verify", "flipped.safetensors", "--manifest", manifest_path)
        failed = [line.split()[1] for line in out.splitlines() if line.startswith("FAILED   ")]
        expect(code == 1 and failed == [name] and f"1 of {n} tensors differ from the manifest: {name}" in out,
               f"{stem}: a flipped byte in {name}: exit {code}, {out!r} {err!r}")


if len(sys.argv) > 4:
    if sys.argv[4] != "pump":
        sys.exit(f"check_models.py: argument 4 = {sys.argv[4]!r}, expected 'pump' or nothing (the belt)")
    check_plan_round_trip(os.path.join(SOURCE, "examples", "models", "pump.json"), "pump")
    finish()


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


# ---- the same plan written with rules --------------------------------------------------
RULES = os.path.join(SOURCE, "examples", "models", "conveyor_belt_rules.json")
code, out, err = run("assemble", RULES, "-o", "rules.safetensors", "--manifest", "rules.json")
expect(code == 0, f"assemble of the rules plan: exit {code}, {err!r}")
expect(json.load(open("rules.json")) == manifest, "the rules plan's manifest differs from the full plan's")
bad = json.load(open(RULES))
bad["rules"].append({"match": "**.bais", "scheme": "zeros"})
json.dump(bad, open("typo.json", "w"))
code, _, err = run("assemble", "typo.json", "-o", "typo.safetensors")
expect(code == 2 and "rules[9] '**.bais' matches no parameter" in err, f"a pattern matching nothing: {code} {err!r}")
bad = json.load(open(RULES))
bad["rules"].append({"match": "gru.w*", "dtype": "f64"})  # 5 literal characters and one '*' each
bad["rules"].append({"match": "*.w_hh", "dtype": "f16"})
json.dump(bad, open("tie.json", "w"))
code, _, err = run("assemble", "tie.json", "-o", "tie.safetensors")
expect(code == 2 and "parameter 'gru.w_hh': rules[9] 'gru.w*' and rules[10] '*.w_hh' both set its element type" in err
       and "equally specific" in err, f"a tie: {code} {err!r}")
bad = json.load(open(RULES))
bad["parameters"].append({"name": "tail.scale", "shape": [4]})
json.dump(bad, open("nomatch.json", "w"))
code, _, err = run("assemble", "nomatch.json", "-o", "nomatch.safetensors")
expect(code == 2 and "parameter 'tail.scale': no rule matches it" in err, f"an unmatched parameter: {code} {err!r}")


# ---- .npz ------------------------------------------------------------------------------
for flag, method in (([], zipfile.ZIP_STORED), (["--compress"], zipfile.ZIP_DEFLATED)):
    code, out, err = run("assemble", PLAN, "-o", "belt.npz", "--manifest", "belt_npz.json", *flag)
    expect(code == 0, f"assemble -o belt.npz {flag}: exit {code}, {err!r}")
    with zipfile.ZipFile("belt.npz") as z:
        expect(z.testzip() is None, f"zipfile finds a bad CRC in belt.npz {flag}")
        expect(all(i.compress_type == method for i in z.infolist()), f"belt.npz {flag}: methods {[i.compress_type for i in z.infolist()]}")
        expect(sorted(z.namelist()) == sorted(n + ".npy" for n in t), f"belt.npz members {z.namelist()}")
    z = npz_values("belt.npz")
    for name, (dtype, a) in t.items():
        expect(name in z and z[name][0] == dtype and z[name][1].shape == a.shape and np.array_equal(z[name][1], a),
               f"belt.npz {flag}: {name} differs from the safetensors file")
    m = json.load(open("belt_npz.json"))
    expect([r["digest"] for r in m["parameters"]] == [r["digest"] for r in manifest["parameters"]],
           f"belt.npz {flag}: manifest digests differ from the safetensors ones")
    code, out, err = run("verify", "belt.npz", "--manifest", "belt.json")
    expect(code == 0 and "all 9 tensors match" in out, f"verify belt.npz {flag}: {code} {out!r} {err!r}")
compressed_size = os.path.getsize("belt.npz")

# Our reader on NumPy's files: np.savez and np.savez_compressed of the same arrays.
arrays = {name: (a.view(np.dtype([("bf16", "<u2")])).reshape(a.shape) if dtype == "BF16" else a)
          for name, (dtype, a) in t.items()}
np.savez("numpy_stored.npz", **arrays)
np.savez_compressed("numpy_deflated.npz", **arrays)
for f in ("numpy_stored.npz", "numpy_deflated.npz"):
    code, out, err = run("verify", f, "--manifest", "belt.json")
    expect(code == 0 and "all 9 tensors match" in out, f"verify {f}: {code} {out!r} {err!r}")
    code, out, err = run("audit", f, "--manifest", "belt.json")
    expect(code == 0 and "all 9 tensors passed" in out, f"audit {f}: {code} {out!r} {err!r}")

# Bad archives: exit 2, naming what is wrong.
raw = open("numpy_stored.npz", "rb").read()
end = raw.rindex(b"PK\x05\x06")
count, dir_size, dir_at = struct.unpack("<HII", raw[end + 10:end + 20])
first = raw[dir_at:dir_at + 46]
name_len = struct.unpack("<H", first[28:30])[0]
first_name = raw[dir_at + 46:dir_at + 46 + name_len].decode()
lie = bytearray(raw)
csize = struct.unpack("<I", raw[dir_at + 20:dir_at + 24])[0]
struct.pack_into("<II", lie, dir_at + 20, csize + 5000, csize + 5000)
open("lie.npz", "wb").write(lie)
code, _, err = run("verify", "lie.npz", "--manifest", "belt.json")
expect(code == 2 and f"member '{first_name}'" in err and "lies about its sizes" in err, f"a lying zip: {code} {err!r}")
cut = bytearray(raw[:end - 20] + raw[end:])  # the last 20 bytes of the directory gone
struct.pack_into("<I", cut, end - 20 + 12, dir_size - 20)
open("cut.npz", "wb").write(cut)
code, _, err = run("audit", "cut.npz", "--manifest", "belt.json")
expect(code == 2 and "central directory is truncated" in err, f"a truncated central directory: {code} {err!r}")
with zipfile.ZipFile("notes.npz", "w") as z:
    z.writestr("head.weight.npy", open("d.npy", "rb").read())
    z.writestr("notes.txt", "not an array")
code, _, err = run("verify", "notes.npz", "--manifest", "belt.json")
expect(code == 2 and "member 'notes.txt' is not a .npy file" in err, f"a member that is not .npy: {code} {err!r}")
code, _, err = run("assemble", PLAN, "-o", "x.safetensors", "--compress")
expect(code == 2 and "--compress applies to .npz output only" in err, f"--compress to safetensors: {code} {err!r}")


# ---- audit -----------------------------------------------------------------------------
code, out, err = run("audit", "belt.safetensors", "--plan", PLAN)
expect(code == 0 and "all 9 tensors passed" in out and "Bonferroni: alpha 0.001 for the whole file" in out,
       f"audit of the correct file: {code} {out!r} {err!r}")
for name in t:
    expect(any(line.startswith(name + " ") and " passed " in line for line in out.splitlines()), f"audit row of {name}: {out!r}")
# One tensor drawn with the wrong fan (fan-in 80 instead of the grouped convolution's 40).
code, _, err = run("draw", "--scheme", "he-normal", "--shape", "32x8x5", "--fan-in", "80", "--fan-out", "80",
                   "--seed", seed, "--name", "front.conv2.weight", "-o", "wrong.npy")
expect(code == 0, f"draw of the wrong tensor: {err!r}")
wrong = dict(t)
wrong["front.conv2.weight"] = ("F32", np.load("wrong.npy"))
write_safetensors("wrong.safetensors", wrong)
code, out, err = run("audit", "wrong.safetensors", "--manifest", "belt.json")
rows = {line.split()[0]: line for line in out.splitlines()[2:] if line and not line.startswith(("audited", "FAILED"))}
expect(code == 1 and "FAILED wrong.safetensors: 1 of 9 tensors failed: front.conv2.weight" in out,
       f"audit of a wrong fan: {code} {out!r} {err!r}")
expect(" FAILED " in rows.get("front.conv2.weight", ""),
       f"the wrong tensor's row: {rows.get('front.conv2.weight')!r}")
expect(all(" passed " in r for n, r in rows.items() if n != "front.conv2.weight"), f"other rows: {out!r}")
code, out, err = run("audit", "wrong.safetensors", "--manifest", "belt.json", "--json")
j = json.loads(out) if code == 1 else {}
expect(code == 1 and j.get("passed") is False and j.get("correction") == "bonferroni"
       and [x["name"] for x in j["tensors"] if not x["passed"]] == ["front.conv2.weight"]
       and abs(j["alpha_each"] - 0.001 / j["statistical_reports"]) < 1e-18,
       f"audit --json: {code} {out[:300]!r} {err!r}")
code, out1, _ = run("audit", "wrong.safetensors", "--manifest", "belt.json", "--threads", "3")
code2, out2, _ = run("audit", "wrong.safetensors", "--manifest", "belt.json")
expect(code == 1 and out1 == out2, "audit --threads 3 differs from one thread")
code, out, err = run("audit", "wrong.safetensors", "--manifest", "belt.json", "--uncorrected", "--json")
j = json.loads(out) if code == 1 else {}
expect(j.get("correction") == "none" and j.get("alpha_each") == 0.001, f"audit --uncorrected: {code} {out[:200]!r}")
# Every other layer kind and the structural schemes pass the audit when drawn right.
every = {"format": "kindling-model-plan", "seed": 5, "rules": [{"match": "**.bias", "layer": "bias", "scheme": "zeros"}],
         "parameters": [
             {"name": "stem.weight", "scheme": "delta-orthogonal(gain=1.5)",
              "layer": {"kind": "convolution", "in": 16, "out": 16, "kernel": [3, 3]}},
             {"name": "up.weight", "scheme": "glorot-normal", "dtype": "f16",
              "layer": {"kind": "transposed_convolution", "in": 32, "out": 16, "kernel": [4, 4]}},
             {"name": "up.bias", "shape": [16]},
             {"name": "embed.weight", "scheme": "lecun-normal", "layer": {"kind": "embedding", "vocabulary": 500, "dimension": 64}},
             {"name": "sparse.weight", "scheme": "sparse(nonzero=5)", "layer": {"kind": "dense", "in": 40, "out": 64}},
             {"name": "skip.weight", "scheme": "identity", "dtype": "bf16", "layer": {"kind": "dense", "in": 32, "out": 32}},
             {"name": "qkv.weight", "scheme": "truncated-normal(std=0.02)", "dtype": "bf16",
              "layer": {"kind": "packed", "blocks": 3, "in": 64, "block_out": 64, "layout": "in_out"}},
             {"name": "out.weight", "scheme": "he-uniform", "layer": {"kind": "dense", "in": 64, "out": 100, "layout": "in_out"}}]}
json.dump(every, open("every.json", "w"))
code, _, err = run("assemble", "every.json", "-o", "every.npz")
expect(code == 0, f"assemble every.json: {code} {err!r}")
code, out, err = run("audit", "every.npz", "--plan", "every.json", "--threads", "2")
expect(code == 0 and "all 8 tensors passed" in out, f"audit of every layer kind: {code} {out!r} {err!r}")
# The exact comparison of a deterministic scheme (identity, zeros) names how many values
# differ and the first: two changed bits past the first MiB of a 2 MiB bf16 identity, read
# after a larger tensor by the same thread, and a zero bias left as written.
exact = {"format": "kindling-model-plan", "seed": 9,
         "parameters": [
             {"name": "wide.weight", "scheme": "he-normal", "dtype": "f32", "layer": {"kind": "dense", "in": 1024, "out": 1536}},
             {"name": "skip.weight", "scheme": "identity", "dtype": "bf16", "layer": {"kind": "dense", "in": 1024, "out": 1024}},
             {"name": "skip.bias", "scheme": "zeros", "layer": {"kind": "bias", "size": 1024}}]}
json.dump(exact, open("exact.json", "w"))
code, _, err = run("assemble", "exact.json", "-o", "exact.safetensors")
expect(code == 0, f"assemble exact.json: {code} {err!r}")
changed = read_safetensors("exact.safetensors") if code == 0 else {}
if changed:
    skip = changed["skip.weight"][1].copy()
    skip.reshape(-1)[[600001, 700000]] ^= 1
    changed["skip.weight"] = ("BF16", skip)
    write_safetensors("changed.safetensors", changed)
    code, out, err = run("audit", "changed.safetensors", "--manifest", "exact.safetensors.manifest.json", "--threads", "1")
    rows = {line.split()[0]: line for line in out.splitlines()[2:] if line and not line.startswith(("audited", "FAILED"))}
    expect(code == 1 and "FAILED changed.safetensors: 1 of 3 tensors failed: skip.weight" in out
           and "exact-values: 2 of 1048576 values differ" in rows.get("skip.weight", "")
           and "(first at flat index 600001)" in rows.get("skip.weight", "")
           and " passed " in rows.get("skip.bias", ""),
           f"audit of a changed identity: {code} {out!r} {err!r}")
    code, out, err = run("audit", "exact.safetensors", "--manifest", "exact.safetensors.manifest.json", "--threads", "1")
    expect(code == 0 and "all 3 tensors passed" in out, f"audit of exact.safetensors: {code} {out!r} {err!r}")
# A safetensors tensor over 128 MiB is audited in place, mapped from the file, and the
# smaller ones after it through the thread's buffer: a 136 MB bf16 normal bias passes,
# and fails once its last 2^20 values (past the first 128 MiB) are set to 0.5, 25 sigma;
# the zero bias read after it still passes.
big = {"format": "kindling-model-plan", "seed": 4,
       "parameters": [{"name": "big.bias", "scheme": "normal(std=0.02)", "dtype": "bf16", "layer": {"kind": "bias", "size": 68157440}},
                      {"name": "small.bias", "scheme": "zeros", "layer": {"kind": "bias", "size": 8256}}]}
json.dump(big, open("big.json", "w"))
code, _, err = run("assemble", "big.json", "-o", "big.safetensors")
expect(code == 0, f"assemble big.json: {code} {err!r}")
if code == 0:
    code, out, err = run("audit", "big.safetensors", "--manifest", "big.safetensors.manifest.json", "--threads", "1")
    expect(code == 0 and "all 2 tensors passed" in out, f"audit of big.safetensors: {code} {out!r} {err!r}")
    with open("big.safetensors", "r+b") as f:
        (n,) = struct.unpack("<Q", f.read(8))
        begin = json.loads(f.read(n))["big.bias"]["data_offsets"][0]
        f.seek(8 + n + begin + 2 * (68157440 - (1 << 20)))
        f.write(struct.pack("<H", 0x3F00) * (1 << 20))  # bf16 0.5
    code, out, err = run("audit", "big.safetensors", "--manifest", "big.safetensors.manifest.json", "--threads", "1")
    rows = {line.split()[0]: line for line in out.splitlines()[2:] if line and not line.startswith(("audited", "FAILED"))}
    expect(code == 1 and " passed " not in rows.get("big.bias", " passed ")
           and " passed " in rows.get("small.bias", ""), f"audit of a changed big bias: {code} {out!r} {err!r}")
    os.remove("big.safetensors")
code, _, err = run("audit", "belt.safetensors", "--plan", PLAN, "--manifest", "belt.json")
expect(code == 2 and "both --plan and --manifest" in err, f"audit with both: {code} {err!r}")
code, _, err = run("audit", "belt.safetensors")
expect(code == 2 and "neither --plan nor --manifest" in err, f"audit with neither: {code} {err!r}")
code, _, err = run("audit", "belt.safetensors", "--plan", PLAN, "--alpha", "1.5")
expect(code == 2 and "--alpha 1.5" in err, f"audit --alpha 1.5: {code} {err!r}")


# ---- threads and the progress line -----------------------------------------------------
def digest(path):
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


code, _, err = run("assemble", PLAN, "-o", "t4.npz", "--manifest", "t4.json", "--threads", "4", "--compress")
expect(code == 0 and digest("t4.npz") == digest("belt.npz"), f"assemble --threads 4: {code} {err!r}")
code, _, err = run("assemble", PLAN, "-o", "t0.npz", "--threads", "0")
expect(code == 2 and "--threads" in err, f"assemble --threads 0: {code} {err!r}")


def run_on_terminal(*args):
    """Runs the tool with stderr on a pseudo-terminal; returns (exit code, what it wrote there)."""
    leader, follower = pty.openpty()
    p = subprocess.Popen([KINDLING, *args], stdout=subprocess.DEVNULL, stderr=follower)
    os.close(follower)
    seen = b""
    while True:
        try:
            chunk = os.read(leader, 4096)
        except OSError:
            break
        if not chunk:
            break
        seen += chunk
    os.close(leader)
    return p.wait(timeout=120), seen.decode(errors="replace")


code, seen = run_on_terminal("assemble", PLAN, "-o", "tty.safetensors")
expect(code == 0 and "assemble: " in seen and "\r" in seen and "of 9 (" in seen, f"progress on a terminal: {code} {seen!r}")
code, seen = run_on_terminal("audit", "belt.safetensors", "--plan", PLAN)
expect(code == 0 and "audit: " in seen and "tensors audited" in seen, f"audit progress on a terminal: {code} {seen!r}")
code, out, err = run("assemble", PLAN, "-o", "pipe.safetensors")
expect(code == 0 and err == "", f"no progress line when stderr is not a terminal: {err!r}")

finish()
