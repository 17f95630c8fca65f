"""Check trajvault's exported selections against h5py slicing of the same
file, sharing no code with trajvault beyond the HDF5 C library.

Usage: python3 h5py_slices.py CASES.json
CASES.json is a list of cases: {"name", "file", "dir", "formats",
"frames": {"slice": [start, stop, step]} (Python slice semantics, null for
an open end) or {"list": [...]}, "atoms": [...] or null, "states": [...]
or null, "quantities": {name: [h5 path of the element, kind]}, "hops":
path of the hops group or null}. kind is frame, atom, state, pair or reim.

For every case and format it compares the values written with the h5py
slice (exactly: the same float64), checks that every printed number keeps
the decimals recorded in the trajvault_format attribute, that .npy files
are NumPy format 1.0 with the data aligned to 64 bytes and load with
numpy.load, and that selection.json counts what was selected.
Prints a JSON report {"checked": n, "errors": [...]}.
"""
import csv
import json
import os
import re
import sys

import h5py
import numpy as np

errors = []
checked = 0


def err(case, msg):
    errors.append(case["name"] + ": " + msg)


def frame_index(f, case, T):
    fr = case["frames"]
    if "slice" in fr:
        return slice(*fr["slice"]), np.arange(T)[slice(*fr["slice"])]
    return fr["list"], np.array(fr["list"])


def expected(f, case, path, kind):
    ds = f[path + "/value"]
    idx, frames = frame_index(f, case, ds.shape[0])
    a = ds[idx]  # h5py reads the slice (or the increasing index list)
    atoms, states = case["atoms"], case["states"]
    if kind == "atom" and atoms is not None:
        a = a[:, atoms, :]
    if kind in ("state", "reim") and states is not None:
        a = a[:, states]
    if kind == "pair" and states is not None:
        a = a[:, states][:, :, states]
    return a


def fmt_attr(f, path):
    a = f[path + "/value"].attrs.get("trajvault_format")
    if a is None:
        return None
    return a.decode() if isinstance(a, bytes) else str(a)


def token_re(fmt, json_out):
    """The printed form a recorded format prescribes (fixed:D = D decimals
    after the point; exp:S:L = S significant digits, exponent letter L)."""
    if fmt is None:
        return None
    parts = fmt.split(":")
    if parts[0] == "fixed":
        d = int(parts[1])
        return re.compile(r"^-?\d+" + (r"\.\d{%d}" % d if d > 0 else "") + "$")
    s = int(parts[1])
    letter = "e" if json_out else (parts[2] if len(parts) > 2 and parts[2] != "F" else "[E]?")
    return re.compile(r"^-?\d" + (r"\.\d{%d}" % (s - 1) if s > 1 else "") + letter + r"[+-]\d{2,}$")


def printed(w, fmt):
    """h5py's value printed in the recorded format with Python's correctly
    rounded %-formatting; without a format, the value itself."""
    parts = fmt.split(":")
    if parts[0] == "fixed":
        return "%.*f" % (int(parts[1]), w)
    return "%.*e" % (int(parts[1]) - 1, w)


def normal(tok):
    """A printed token with its exponent letter as 'e' (a dropped letter
    restored)."""
    t = re.sub(r"[dDE]", "e", tok)
    m = re.match(r"^(-?[\d.]+)([+-]\d+)$", t)
    if m:
        t = m.group(1) + "e" + m.group(2)
    if re.match(r"^-?\d+(\.\d+)?e[+-]\d+$", t) or re.match(r"^-?\d+\.\d+$", t) or re.match(r"^-?\d+$", t):
        return t
    return tok


def to_float(tok):
    return float(re.sub(r"[dD]", "e", tok))


def check_tokens(case, what, toks, want, fmt, json_out):
    global checked
    want = np.asarray(want).reshape(-1)
    if len(toks) != want.size:
        err(case, "%s: %d values, h5py slice has %d" % (what, len(toks), want.size))
        return
    rx = token_re(fmt, json_out)
    for t, w in zip(toks, want):
        checked += 1
        if rx is not None and not rx.match(t):
            err(case, "%s: %r is not printed as recorded (%s)" % (what, t, fmt))
            return
        if (fmt is None and to_float(t) != float(w)) or (fmt is not None and printed(float(w), fmt) != normal(t)):
            err(case, "%s: %r, h5py %r printed as recorded (%s) is %r" % (what, t, float(w), fmt, printed(float(w), fmt)))
            return


def check_times(case, toks, want, fmt):
    """Times of H5MD fixed mode are offset + i * increment, which the
    recorded format prints rounded: a printed time must be within half a
    unit of its last recorded digit of h5py's value."""
    global checked
    if isinstance(fmt, bytes):
        fmt = fmt.decode()
    tol = 0.0
    if fmt and fmt.startswith("fixed:"):
        tol = 0.5 * 10.0 ** -int(fmt.split(":")[1]) * (1 + 1e-9)
    for t, w in zip(toks, want):
        checked += 1
        if abs(to_float(t) - float(w)) > tol:
            err(case, "time %r is not h5py's %r (format %s)" % (t, float(w), fmt))
            return


def flat_tokens(v):
    if isinstance(v, list):
        out = []
        for x in v:
            out.extend(flat_tokens(x))
        return out
    return [v]


def expected_hops(f, case, steps):
    g = f[case["hops"]]
    st, fr, to, kind = (g[k][()] for k in ("step", "from_state", "to_state", "kind"))
    keep = (st >= steps[0]) & (st <= steps[-1])
    if case["states"] is not None:
        keep &= np.isin(fr, case["states"]) & np.isin(to, case["states"])
    return [(int(a), int(b), int(c), int(d)) for a, b, c, d in zip(st[keep], fr[keep], to[keep], kind[keep])]


def clock(f, case, T):
    """Steps and times of the particle group's positions, explicit or
    H5MD fixed mode (value i = offset + i * increment)."""
    pos = case["clock"]
    out = []
    for k in ("step", "time"):
        ds = f[pos + "/" + k]
        if ds.shape == ():
            off = ds.attrs.get("offset", 0)
            out.append(off + np.arange(T) * ds[()])
        else:
            out.append(ds[()])
    return out


def check_case(case):
    global checked
    with h5py.File(case["file"], "r") as f:
        T = f[case["clock"] + "/value"].shape[0]
        _, frames = frame_index(f, case, T)
        steps, times = clock(f, case, T)
        steps, times = steps[frames], times[frames]
        for fmt, d in case["formats"].items():
            sel = json.load(open(os.path.join(d, "selection.json")))
            if sel["frame_count"] != len(frames) or sel["first_frame"] != frames[0]:
                err(case, "%s: selection.json says %d frames from %d, h5py %d from %d" % (fmt, sel["frame_count"], sel["first_frame"], len(frames), frames[0]))
            if case["atoms"] is not None and sel["atoms"] != case["atoms"]:
                err(case, "%s: selection.json atoms %s" % (fmt, sel["atoms"]))
            if fmt == "npy":
                for name, (path, kind) in case["quantities"].items():
                    p = os.path.join(d, name + ".npy")
                    with open(p, "rb") as fh:
                        major, minor = np.lib.format.read_magic(fh)
                        np.lib.format.read_array_header_1_0(fh)
                        if (major, minor) != (1, 0) or fh.tell() % 64:
                            err(case, "%s: format %d.%d, data at byte %d" % (p, major, minor, fh.tell()))
                    got, want = np.load(p), expected(f, case, path, kind)
                    checked += got.size
                    if got.dtype.str not in ("<f8", "<i8") or got.shape != want.shape or not np.array_equal(got, want):
                        err(case, "%s: numpy.load gives %s %s, h5py slice %s %s" % (name, got.dtype, got.shape, want.dtype, want.shape))
                if not np.array_equal(np.load(os.path.join(d, "frame.npy")), frames) or \
                        not np.array_equal(np.load(os.path.join(d, "step.npy")), steps) or \
                        not np.array_equal(np.load(os.path.join(d, "time.npy")), times):
                    err(case, "npy: frame/step/time differ from h5py")
                if case["hops"]:
                    got = [tuple(int(x) for x in r) for r in np.load(os.path.join(d, "hops.npy"))]
                    if got != expected_hops(f, case, steps):
                        err(case, "npy hops %s != h5py %s" % (got, expected_hops(f, case, steps)))
            elif fmt == "json":
                doc = json.load(open(os.path.join(d, "values.json")), parse_float=str, parse_int=str)
                if [int(x) for x in doc["frame"]] != list(frames) or [int(x) for x in doc["step"]] != list(steps):
                    err(case, "json: frames or steps differ from h5py")
                check_times(case, doc["time"], times, f[case["clock"] + "/time"].attrs.get("trajvault_format"))
                for name, (path, kind) in case["quantities"].items():
                    check_tokens(case, "json " + name, flat_tokens(doc["values"][name]), expected(f, case, path, kind), fmt_attr(f, path), True)
                if case["hops"]:
                    got = [(int(h["step"]), int(h["from_state"]), int(h["to_state"]), {"accepted": 0, "frustrated": 1}[h["kind"]]) for h in doc["hops"]]
                    if got != expected_hops(f, case, steps):
                        err(case, "json hops %s != h5py %s" % (got, expected_hops(f, case, steps)))
            elif fmt == "csv":
                lines = open(os.path.join(d, "values.csv")).read().splitlines()
                if not lines[0].startswith("# selection of "):
                    err(case, "csv: no comment line saying what was selected")
                rows = list(csv.reader(lines[1:]))
                head = [re.sub(r"\[.*\]$", "", h) for h in rows[0]]
                body = rows[1:]
                if [int(r[0]) for r in body] != list(frames):
                    err(case, "csv: frame column differs from h5py")
                for name, (path, kind) in case["quantities"].items():
                    cols = [i for i, h in enumerate(head) if h == name or re.match(re.escape(name) + r"_\d", h)]
                    toks = [r[i] for r in body for i in cols]
                    check_tokens(case, "csv " + name, toks, expected(f, case, path, kind), fmt_attr(f, path), False)


def main():
    cases = json.load(open(sys.argv[1]))
    for c in cases:
        try:
            check_case(c)
        except Exception as e:  # report, do not hide, a failing case
            err(c, "%s: %s" % (type(e).__name__, e))
    print(json.dumps({"checked": checked, "errors": errors, "h5py": h5py.__version__, "numpy": np.__version__}))


main()
