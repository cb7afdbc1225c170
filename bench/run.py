#!/usr/bin/python3
"""Side-by-side benchmark: levelshift against the NumPy/SciPy baseline.

    /usr/bin/python3 bench/run.py [JOB ...] [--runs 5] [--bin build/levelshift] [--markdown]

Runs every job found in bench/jobs/ (or the ones named), alternating
levelshift and the baseline (../shared/bench/peer.py, or LVS_PEER=path) in
one run, and prints ratios of medians (baseline time / levelshift time:
above 1 means levelshift is faster) for the core computation (build +
solve, as each program reports it on its `JOB seconds=...` line) and for the
whole process, plus levelshift's start-up (`levelshift -e ''`). Skips the
baseline cleanly when python3-numpy/python3-scipy are absent. Not part of
the test suite.
"""
import argparse, os, platform, statistics, subprocess, sys, time

HERE = os.path.dirname(os.path.abspath(__file__))
PEER = os.environ.get("LVS_PEER") or os.path.join(HERE, "..", "..", "shared", "bench", "peer.py")

# Sizes of the baseline runs; the Lua jobs default to the same sizes.
PEER_ARGS = {"rs": ["2000", "40"], "transition": [],
             "sweep": ["--banded", "--out", os.path.join(os.environ.get("TMPDIR", "/tmp"), "peer-sweep.csv")],
             "polarizability": ["48000"]}


def run(cmd):
    t0 = time.perf_counter()
    out = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if out.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)}: {out.stderr.strip()[:300]}")
    line = [l for l in out.stdout.strip().splitlines() if " seconds=" in l][-1]
    fields = dict(f.split("=", 1) for f in line.split()[1:] if "=" in f)
    return float(fields["seconds"]), wall, fields.get("result")


def run_startup(binary):
    t0 = time.perf_counter()
    subprocess.run([binary, "-e", ""], check=True)
    return time.perf_counter() - t0


def machine():
    model = "?"
    try:
        for line in subprocess.run(["lscpu"], capture_output=True, text=True).stdout.splitlines():
            if line.startswith("Model name:"):
                model = line.split(":", 1)[1].strip()
    except OSError:
        pass
    load = " ".join(f"{x:.2f}" for x in os.getloadavg())
    return (f"{os.cpu_count()} cores, {model}, {platform.machine()}; "
            f"OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}; "
            f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}; "
            f"load average {load}; {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("jobs", nargs="*", default=None)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--bin", default=os.path.join(HERE, "..", "build", "levelshift"))
    ap.add_argument("--markdown", action="store_true", help="also print a README table")
    a = ap.parse_args()
    a.runs = max(a.runs, 1)
    jobs = a.jobs or sorted(f[:-4] for f in os.listdir(os.path.join(HERE, "jobs")) if f.endswith(".lua"))
    have_peer = True
    try:
        import numpy, scipy  # noqa: F401
    except ImportError:
        have_peer = False
        print("# baseline skipped: python3-numpy/python3-scipy not installed")
    if have_peer and not os.path.exists(PEER):
        have_peer = False
        print(f"# baseline skipped: no peer.py at {PEER} (set LVS_PEER)")
    print("# machine:", machine())
    startup = []
    peer_noop = []
    for _ in range(max(a.runs, 11)):
        startup.append(run_startup(a.bin))
        if have_peer:
            peer_noop.append(run(["/usr/bin/python3", PEER, "noop"])[1])
    med = statistics.median
    print(f"# levelshift start-up (levelshift -e ''): median {1e3 * med(startup):.2f} ms, "
          f"min {1e3 * min(startup):.2f} ms over {len(startup)} runs"
          + (f"; baseline interpreter + imports: median {1e3 * med(peer_noop):.0f} ms" if peer_noop else ""))
    print(f"{'job':16s} {'ls core s':>10s} {'peer core s':>11s} {'core ratio':>10s} "
          f"{'ls proc s':>10s} {'peer proc s':>11s} {'proc ratio':>10s}  results (ls | peer)")
    rows = []
    for job in jobs:
        ls_core, ls_wall, py_core, py_wall = [], [], [], []
        res = ("-", "-")
        try:
            for _ in range(a.runs):
                c, w, r1 = run([a.bin, os.path.join(HERE, "jobs", job + ".lua")])
                ls_core.append(c); ls_wall.append(w)
                r2 = "-"
                if have_peer:
                    c, w, r2 = run(["/usr/bin/python3", PEER, job] + PEER_ARGS.get(job, []))
                    py_core.append(c); py_wall.append(w)
                res = (r1, r2)
        except (RuntimeError, IndexError, KeyError, ValueError) as e:
            print(f"{job:16s} failed: {e}")
            continue
        if have_peer:
            cr, pr = med(py_core) / med(ls_core), med(py_wall) / med(ls_wall)
            print(f"{job:16s} {med(ls_core):10.4f} {med(py_core):11.4f} {cr:10.2f} "
                  f"{med(ls_wall):10.4f} {med(py_wall):11.4f} {pr:10.2f}  {res[0]} | {res[1]}")
            rows.append((job, med(ls_core), med(py_core), cr, med(ls_wall), med(py_wall), pr))
        else:
            print(f"{job:16s} {med(ls_core):10.4f} {'-':>11s} {'-':>10s} {med(ls_wall):10.4f}  {res[0]}")
        sys.stdout.flush()
    if a.markdown and rows:
        print()
        print("| job | levelshift core | baseline core | core ratio | levelshift process | baseline process | process ratio |")
        print("|---|---|---|---|---|---|---|")
        for r in rows:
            print(f"| {r[0]} | {r[1]:.4f} s | {r[2]:.4f} s | {r[3]:.2f} | {r[4]:.3f} s | {r[5]:.3f} s | {r[6]:.2f} |")


if __name__ == "__main__":
    main()
