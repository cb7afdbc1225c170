#!/usr/bin/python3
"""Side-by-side benchmark: levelshift against the NumPy/SciPy baseline.

    /usr/bin/python3 bench/run.py [JOB ...] [--runs 5] [--bin build/levelshift] [--markdown]
                                  [--timeout 900]

Runs every job found in bench/jobs/ (or the ones named), alternating
levelshift and the baseline (../shared/bench/peer.py, or LVS_PEER=path; the
sparse jobs of issue 15 run against bench/peer_sparse.py) in one run, and
prints ratios of medians (baseline time / levelshift time: above 1 means
levelshift is faster) for the core computation (build + solve, as each
program reports it on its `JOB seconds=...` line) and for the whole process,
plus levelshift's start-up (`levelshift -e ''`), and each side's peak
resident memory (the largest ru_maxrss of its runs, from os.wait4). Skips the
baseline cleanly when python3-numpy/python3-scipy are absent, and runs a job
without a baseline (effective_big) on its own, against its absolute target.
Not part of the test suite.

Jobs of issue 15 (large sparse models), each on the full 2^L product basis
of L spins 1/2 (open chains; h, Delta invented values). A sized job is
named by its file and L (chain_eigen16 runs bench/jobs/chain_eigen.lua with
sites=16 against `peer_sparse.py chain_eigen 16`); any L can be named, e.g.
chain_eigen20 or xxz_series12 by hand. Targets:

  chain_eigen12/16/18  lowest 4 levels of sum S_i.S_i+1 + 0.3 sum Sx_i
                       (ls.eigen count = 4 vs eigsh k = 4, 'SA', tol = 0):
                       >= 1.5x faster than eigsh, peak memory <= SciPy's;
                       chain_eigen20 (by hand) completes
  xxz_series           L = 16, Delta = 0.5, V = sum (-1)^i Sz_i, order 8,
                       ground level (ls.perturb vs eigsh + splu of the
                       bordered E0 - H0): levelshift's series (core - build)
                       <= 3x the baseline's eigsh alone (its eigsh_seconds)
  effective_big        effective Hamiltonian of 2 levels out of 100,000,
                       order 6 (bench/jobs/effective_big.lua, no baseline):
                       < 50 ms and < 100 MB peak
  chain_sweep          L = 14, lowest 4 of H0 + p sum Sx, 200 points p = 0..1
                       (ls.sweep vs a loop of eigsh, warm-started from the
                       previous point's ground vector): >= 2x faster
  chain_build12/16/18/20  the chain_eigen Hamiltonian built only (ls.product,
                       ls.sum vs sums of scipy.sparse.kron): faster at every L
"""
import argparse, importlib.util, os, platform, re, resource, statistics, subprocess, sys, tempfile
import threading, time

HERE = os.path.dirname(os.path.abspath(__file__))
PEER = os.environ.get("LVS_PEER") or os.path.join(HERE, "..", "..", "shared", "bench", "peer.py")
PEER_SPARSE = os.path.join(HERE, "peer_sparse.py")

# Sizes of the baseline runs; the Lua jobs default to the same sizes.
PEER_ARGS = {"rs": ["2000", "40"], "transition": [],
             "sweep": ["--banded", "--out", os.path.join(os.environ.get("TMPDIR", "/tmp"), "peer-sweep.csv")],
             "polarizability": ["48000"]}

# Jobs of issue 15, baseline bench/peer_sparse.py: Lua file -> the L of the
# default run (None: the file's own default size, named without L).
SPARSE = {"chain_eigen": [12, 16, 18], "chain_build": [12, 16, 18, 20],
          "xxz_series": [None], "chain_sweep": [None]}
# Jobs with no baseline: an absolute target only.
NO_BASELINE = {"effective_big"}

MB = 1024.0  # ru_maxrss is in KiB on Linux


def target_check(job, s):
    """(what the target is, met?) for a job of issue 15 from its medians s, or None."""
    stem = re.sub(r"\d+$", "", job)
    if stem == "chain_eigen" and s.get("peer_core"):
        met = s["peer_core"] / s["ls_core"] >= 1.5 and s["ls_rss"] <= s["peer_rss"]
        return ">= 1.5x eigsh, peak RSS <= SciPy's", met
    if stem == "chain_sweep" and s.get("peer_core"):
        return ">= 2x the eigsh loop", s["peer_core"] / s["ls_core"] >= 2
    if stem == "chain_build" and s.get("peer_core"):
        return "faster than kron sums", s["peer_core"] / s["ls_core"] > 1
    if stem == "xxz_series" and "eigsh_seconds" in s.get("peer_fields", {}):
        series = s["ls_core"] - s["ls_fields"].get("build", 0.0)
        eig = s["peer_fields"]["eigsh_seconds"]
        return (f"series <= 3x eigsh alone (series {series:.4f} s = {series / eig:.2f}x "
                f"eigsh {eig:.4f} s)", series <= 3 * eig)
    if stem == "effective_big":
        return "< 50 ms and < 100 MB", s["ls_core"] < 0.050 and s["ls_rss"] < 100 * MB
    return None


def job_commands(job, binary, have_peer):
    """(levelshift command, baseline command or None) of a job name."""
    m = re.fullmatch(r"([a-z_]+?)(\d*)", job)
    stem, size = (m.group(1), m.group(2)) if m else (job, "")
    if stem not in SPARSE:
        stem, size = job, ""
    lua = os.path.join(HERE, "jobs", stem + ".lua")
    if not os.path.exists(lua):
        raise RuntimeError(f"no job file {lua}")
    ls_cmd = [binary, lua] + ([f"sites={size}"] if size else [])
    if not have_peer or stem in NO_BASELINE:
        return ls_cmd, None
    if stem in SPARSE:
        return ls_cmd, ["/usr/bin/python3", PEER_SPARSE, stem] + ([size] if size else [])
    return ls_cmd, ["/usr/bin/python3", PEER, job] + PEER_ARGS.get(job, [])


def default_jobs():
    jobs = []
    for stem in sorted(f[:-4] for f in os.listdir(os.path.join(HERE, "jobs")) if f.endswith(".lua")):
        jobs += [stem + (str(L) if L else "") for L in SPARSE.get(stem, [None])]
    return jobs


def wait_child(cmd, timeout):
    """Run cmd; (wall seconds, exit code, stdout, stderr, peak RSS in KiB) from os.wait4."""
    with tempfile.TemporaryFile("w+") as out, tempfile.TemporaryFile("w+") as err:
        t0 = time.perf_counter()
        p = subprocess.Popen(cmd, stdout=out, stderr=err, text=True)
        timer = threading.Timer(timeout, p.kill) if timeout else None
        if timer:
            timer.start()
        _, status, usage = os.wait4(p.pid, 0)
        wall = time.perf_counter() - t0
        if timer:
            timer.cancel()
        p.returncode = os.waitstatus_to_exitcode(status)  # reaped here, not by Popen
        out.seek(0); err.seek(0)
        return wall, p.returncode, out.read(), err.read(), usage.ru_maxrss


def run(cmd, timeout=None):
    wall, rc, stdout, stderr, rss = wait_child(cmd, timeout)
    if rc != 0:
        first = (stderr.strip().splitlines() or [f"exit status {rc}"])[0]   # not the traceback
        why = f"killed after {timeout:g} s" if rc < 0 and timeout and wall >= timeout else first[:300]
        raise RuntimeError(f"{' '.join(cmd)}: {why}")
    line = [l for l in stdout.strip().splitlines() if " seconds=" in l][-1]
    fields = dict(f.split("=", 1) for f in line.split()[1:] if "=" in f)
    return float(fields["seconds"]), wall, fields.get("result"), fields, rss


def run_startup(binary):
    return wait_child([binary, "-e", ""], None)


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


def numbers(fields):
    """The compared numbers of a job line: every field but the timings."""
    out = {}
    for k, v in fields.items():
        if k == "seconds" or k == "build" or k.endswith("_seconds"):
            continue
        try:
            out[k] = float(v)
        except ValueError:
            pass
    return out


def agreement(ls_fields, peer_fields):
    """Largest relative difference of the numbers both sides printed, or None."""
    a, b = numbers(ls_fields), numbers(peer_fields)
    common = [k for k in a if k in b]
    if not common:
        return None
    return max(abs(a[k] - b[k]) / max(abs(a[k]), abs(b[k]), 1e-300) for k in common)


def median_fields(runs):
    """Medians of the numeric fields over runs (list of field dicts)."""
    keys = set().union(*runs) if runs else set()
    med = {}
    for k in keys:
        try:
            med[k] = statistics.median(float(r[k]) for r in runs if k in r)
        except ValueError:
            pass
    return med


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("jobs", nargs="*", default=None)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--bin", default=os.path.join(HERE, "..", "build", "levelshift"))
    ap.add_argument("--markdown", action="store_true", help="also print a markdown table (docs/benchmarks.md)")
    ap.add_argument("--timeout", type=float, default=900.0,
                    help="kill a single run after this many seconds (0: never)")
    a = ap.parse_args()
    a.runs = max(a.runs, 1)
    jobs = a.jobs or default_jobs()
    # found, not imported: importing them would add ~25 MB to this process,
    # and a child's ru_maxrss starts from its parent's resident set at the fork
    have_peer = all(importlib.util.find_spec(m) is not None for m in ("numpy", "scipy"))
    if not have_peer:
        print("# baseline skipped: python3-numpy/python3-scipy not installed")
    if have_peer and not os.path.exists(PEER):
        have_peer = False
        print(f"# baseline skipped: no peer.py at {PEER} (set LVS_PEER)")
    print("# machine:", machine())
    floor = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(f"# peak RSS = ru_maxrss of each child (os.wait4), largest over its runs; Linux counts this "
          f"process's {floor / MB:.1f} MB at the fork, so a value near that means at most that")
    startup, startup_rss = [], 0
    peer_noop, peer_noop_rss = [], 0
    for _ in range(max(a.runs, 11)):
        wall, _, _, _, rss = run_startup(a.bin)
        startup.append(wall); startup_rss = max(startup_rss, rss)
        if have_peer:
            _, wall, _, _, rss = run(["/usr/bin/python3", PEER, "noop"])
            peer_noop.append(wall); peer_noop_rss = max(peer_noop_rss, rss)
    med = statistics.median
    print(f"# levelshift start-up (levelshift -e ''): median {1e3 * med(startup):.2f} ms, "
          f"min {1e3 * min(startup):.2f} ms over {len(startup)} runs, peak RSS {startup_rss / MB:.1f} MB"
          + (f"; baseline interpreter + imports: median {1e3 * med(peer_noop):.0f} ms, "
             f"peak RSS {peer_noop_rss / MB:.1f} MB" if peer_noop else ""))
    print(f"{'job':16s} {'ls core s':>10s} {'peer core s':>11s} {'core ratio':>10s} "
          f"{'ls proc s':>10s} {'peer proc s':>11s} {'proc ratio':>10s} {'ls MB':>8s} {'peer MB':>8s}"
          f"  results (ls | peer)")
    rows = []
    for job in jobs:
        ls_core, ls_wall, py_core, py_wall, ls_runs, py_runs = [], [], [], [], [], []
        ls_rss = py_rss = 0
        res = ("-", "-")
        try:
            ls_cmd, peer_cmd = job_commands(job, a.bin, have_peer)
            for _ in range(a.runs):
                c, w, r1, f1, rss = run(ls_cmd, a.timeout)
                ls_core.append(c); ls_wall.append(w); ls_runs.append(f1); ls_rss = max(ls_rss, rss)
                r2 = "-"
                if peer_cmd:
                    c, w, r2, f2, rss = run(peer_cmd, a.timeout)
                    py_core.append(c); py_wall.append(w); py_runs.append(f2); py_rss = max(py_rss, rss)
                res = (r1, r2)
        except (RuntimeError, IndexError, KeyError, ValueError) as e:
            print(f"{job:16s} failed: {e}")
            continue
        stats = {"ls_core": med(ls_core), "ls_rss": ls_rss, "ls_fields": median_fields(ls_runs)}
        if peer_cmd:
            cr, pr = med(py_core) / med(ls_core), med(py_wall) / med(ls_wall)
            agree = agreement(ls_runs[-1], py_runs[-1])
            print(f"{job:16s} {med(ls_core):10.4f} {med(py_core):11.4f} {cr:10.2f} "
                  f"{med(ls_wall):10.4f} {med(py_wall):11.4f} {pr:10.2f} {ls_rss / MB:8.1f} {py_rss / MB:8.1f}"
                  f"  {res[0]} | {res[1]}" + (f" (max rel. diff {agree:.1e})" if agree is not None else ""))
            rows.append((job, med(ls_core), med(py_core), cr, med(ls_wall), med(py_wall), pr,
                         ls_rss / MB, py_rss / MB))
            stats.update(peer_core=med(py_core), peer_rss=py_rss, peer_fields=median_fields(py_runs))
        else:
            print(f"{job:16s} {med(ls_core):10.4f} {'-':>11s} {'-':>10s} {med(ls_wall):10.4f} "
                  f"{'-':>11s} {'-':>10s} {ls_rss / MB:8.1f} {'-':>8s}  {res[0]}")
            rows.append((job, med(ls_core), None, None, med(ls_wall), None, None, ls_rss / MB, None))
        target = target_check(job, stats)
        if target:
            print(f"{'':16s} target {target[0]}: {'met' if target[1] else 'NOT met'}")
        sys.stdout.flush()
    if a.markdown and rows:
        print()
        print("| job | levelshift core | baseline core | core ratio | levelshift process | baseline process "
              "| process ratio | levelshift peak RSS | baseline peak RSS |")
        print("|---|---|---|---|---|---|---|---|---|")
        def cell(x, fmt, unit=""):
            return "-" if x is None else format(x, fmt) + unit
        for r in rows:   # a job without a baseline has None in the baseline's cells
            print(f"| {r[0]} | {r[1]:.4f} s | {cell(r[2], '.4f', ' s')} | {cell(r[3], '.2f')} | {r[4]:.3f} s "
                  f"| {cell(r[5], '.3f', ' s')} | {cell(r[6], '.2f')} | {r[7]:.0f} MB | {cell(r[8], '.0f', ' MB')} |")


if __name__ == "__main__":
    main()
