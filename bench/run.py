#!/usr/bin/python3
"""Side-by-side benchmark: levelshift against the NumPy/SciPy baseline.

    /usr/bin/python3 bench/run.py [JOB ...] [--runs 5] [--bin build/levelshift]

Alternates the two programs in one run and prints ratios of medians (baseline
time / levelshift time: above 1 means levelshift is faster), for the core
computation (build + solve, as each program reports it) and for the whole
process. Skips the baseline cleanly when python3-numpy/python3-scipy are absent.
Not part of the test suite.
"""
import argparse, os, statistics, subprocess, sys, time

HERE = os.path.dirname(os.path.abspath(__file__))
PEER = os.environ.get("LVS_PEER") or os.path.join(HERE, "..", "..", "shared", "bench", "peer.py")


def run(cmd):
    t0 = time.perf_counter()
    out = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if out.returncode != 0:
        raise RuntimeError(f"{cmd}: {out.stderr.strip()}")
    line = out.stdout.strip().splitlines()[-1]
    fields = dict(f.split("=", 1) for f in line.split()[1:])
    return float(fields["seconds"]), wall, fields.get("result")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("jobs", nargs="*", default=None)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--bin", default=os.path.join(HERE, "..", "build", "levelshift"))
    a = ap.parse_args()
    jobs = a.jobs or sorted(f[:-4] for f in os.listdir(os.path.join(HERE, "jobs")) if f.endswith(".lua"))
    try:
        import numpy, scipy  # noqa: F401
        have_peer = os.path.exists(PEER)
    except ImportError:
        have_peer = False
        print("# baseline skipped: python3-numpy/python3-scipy not installed")
    if not have_peer:
        print(f"# baseline skipped: no peer.py at {PEER} (set LVS_PEER)")
    startup = [run_startup(a.bin) for _ in range(a.runs)]
    print(f"# levelshift start-up (levelshift -e ''): median {1e3 * statistics.median(startup):.2f} ms")
    print(f"{'job':16s} {'ls core s':>10s} {'peer core s':>11s} {'core ratio':>10s} "
          f"{'ls proc s':>10s} {'peer proc s':>11s} {'proc ratio':>10s}  results")
    for job in jobs:
        ls_core, ls_wall, py_core, py_wall = [], [], [], []
        res = ("", "")
        for _ in range(a.runs):
            c, w, r1 = run([a.bin, os.path.join(HERE, "jobs", job + ".lua")])
            ls_core.append(c); ls_wall.append(w)
            if have_peer:
                c, w, r2 = run(["/usr/bin/python3", PEER, job] + PEER_ARGS.get(job, []))
                py_core.append(c); py_wall.append(w)
                res = (r1, r2)
            else:
                res = (r1, "-")
        m = statistics.median
        if have_peer:
            print(f"{job:16s} {m(ls_core):10.4f} {m(py_core):11.4f} {m(py_core)/m(ls_core):10.2f} "
                  f"{m(ls_wall):10.4f} {m(py_wall):11.4f} {m(py_wall)/m(ls_wall):10.2f}  {res[0]} | {res[1]}")
        else:
            print(f"{job:16s} {m(ls_core):10.4f} {'-':>11s} {'-':>10s} {m(ls_wall):10.4f}  {res[0]}")


PEER_ARGS = {"rs": ["2000", "40"], "transition": []}


def run_startup(binary):
    t0 = time.perf_counter()
    subprocess.run([binary, "-e", ""], check=True)
    return time.perf_counter() - t0


if __name__ == "__main__":
    main()
