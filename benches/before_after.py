#!/usr/bin/env python3
"""Times two builds of baserate side by side on the reference workload:
reading (`describe`, the parallel reader to the training matrix and schema),
`compare --folds 5` (all four families) and `score` (LDA), alternating the
two binaries run by run and printing the median of each and their ratio.

    python3 benches/before_after.py OLD_BINARY NEW_BINARY DATA.csv [RUNS]

The workload is ../shared/bench/gen.py's (1,000,000 x 20 + y); `cargo bench`
caches it as benches/data/reference_1000000.csv. Machines are shared and
noisy: only ratios measured in one run mean anything.
"""
import os
import statistics
import subprocess
import sys
import tempfile
import time


def seconds(args):
    start = time.perf_counter()
    subprocess.run(args, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start


def main():
    old, new, data = sys.argv[1], sys.argv[2], sys.argv[3]
    runs = int(sys.argv[4]) if len(sys.argv) > 4 else 5
    work = tempfile.mkdtemp(prefix="baserate-before-after-")
    models = {}
    for label, binary in (("old", old), ("new", new)):
        model = os.path.join(work, f"{label}.json")
        subprocess.run([binary, "fit", data, "--target", "y", "--family", "lda", "-o", model], check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        models[label] = model
    out = os.path.join(work, "scores.csv")
    jobs = {
        "read (describe)": lambda b, m: [b, "describe", data, "--target", "y"],
        "compare --folds 5": lambda b, m: [b, "compare", data, "--target", "y", "--folds", "5"],
        "score (lda)": lambda b, m: [b, "score", m, data, "-o", out, "-q"],
    }
    print(f"file: {data}; {runs} alternating runs each; medians")
    for name, command in jobs.items():
        times = {"old": [], "new": []}
        for _ in range(runs):
            for label, binary in (("old", old), ("new", new)):
                times[label].append(seconds(command(binary, models[label])))
        a, b = statistics.median(times["old"]), statistics.median(times["new"])
        print(f"{name:<20} before {a:.3f} s   after {b:.3f} s   after/before {b / a:.3f}")


if __name__ == "__main__":
    main()
