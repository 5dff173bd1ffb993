#!/usr/bin/env python3
"""Peak memory while a model file loads, against the bound of four times
the file's size plus 50 MB.

    python3 benches/model_load_memory.py BASERATE [WORKDIR]

Fits a wide QDA model (1,150 numeric inputs, two classes: about 80 MB of
JSON, larger than any real scorecard or fraud model), then loads it, and
hostile variants of it, with `inspect --json /dev/null` under
/usr/bin/time, printing the peak resident memory of each load. The data
are random normals from a fixed seed (numpy), made for this benchmark.
"""

import os
import subprocess
import sys

import numpy as np


def peak_kb(baserate, args):
    """(exit code, peak resident KB, seconds, stderr's first line)."""
    out = subprocess.run(
        ["/usr/bin/time", "-f", "%M %e", baserate, *args],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    lines = out.stderr.strip().splitlines()
    kb, seconds = lines[-1].split()
    return out.returncode, int(kb), float(seconds), (lines[0] if len(lines) > 1 else "")


def main():
    baserate = os.path.abspath(sys.argv[1])
    work = sys.argv[2] if len(sys.argv) > 2 else "/tmp/baserate-model-memory"
    os.makedirs(work, exist_ok=True)
    data = os.path.join(work, "wide.csv")
    model = os.path.join(work, "wide_qda.json")
    if not os.path.exists(model):
        rng = np.random.default_rng(1)
        n, p = 2600, 1150
        x = rng.normal(size=(n, p))
        y = np.where(x[:, 0] + rng.normal(size=n) > 0, "bad", "good")
        with open(data, "w") as f:
            f.write(",".join(f"x{j}" for j in range(p)) + ",y\n")
            for i in range(n):
                f.write(",".join(f"{v:.4f}" for v in x[i]) + "," + y[i] + "\n")
        subprocess.run([baserate, "fit", data, "--target", "y", "--family", "qda", "-o", model],
                       check=True, stdout=subprocess.DEVNULL)
    text = open(model).read()
    cases = [("wide QDA model, as written", model, [])]
    # The same content with one value added: refused
    # on the first pass.
    edited = os.path.join(work, "edited.json")
    open(edited, "w").write(text.replace('"prior": [', '"prior": [0.0,', 1))
    cases.append(("edited (one value added)", edited, []))
    # 100 MB of zeros inside a known field, edit accepted: refused by the
    # first pass's count before anything is built.
    dense = os.path.join(work, "dense.json")
    zeros = ",".join(["0"] * 50_000_000)
    open(dense, "w").write(text.replace('"prior": [', '"prior": [' + zeros + ",", 1))
    cases.append(("100 MB of zeros added to a known field, edit accepted", dense, ["--accept-edited-model"]))
    # 1 GB: refused on its size alone (sparse file).
    huge = os.path.join(work, "huge.json")
    with open(huge, "wb") as f:
        f.truncate(1 << 30)
    cases.append(("1 GiB file", huge, []))
    print(f"{'case':50} {'size MB':>9} {'peak MB':>9} {'bound MB':>9} {'ratio':>6} {'s':>6}  outcome")
    for name, path, extra in cases:
        size = os.path.getsize(path)
        code, kb, seconds, message = peak_kb(baserate, ["inspect", path, "--json", "/dev/null", *extra])
        peak = kb * 1024
        bound = 4 * size + 50_000_000
        outcome = "loaded" if code == 0 else f"refused (exit {code}): {message[:70]}"
        print(f"{name:50} {size / 1e6:9.1f} {peak / 1e6:9.1f} {bound / 1e6:9.1f} {peak / size:6.2f} {seconds:6.2f}  {outcome}")
        assert peak < bound, f"{name}: peak {peak} over the bound {bound}"


if __name__ == "__main__":
    main()
