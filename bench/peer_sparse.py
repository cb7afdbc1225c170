#!/usr/bin/python3
"""Sparse baseline: large spin-chain jobs written the way a physicist would in SciPy.

The jobs of issue 15 (large sparse models), which ../shared/bench/peer.py does
not have.  Operators are built as sums of scipy.sparse.kron products on the
full product basis of L spins 1/2 (site 1 = leftmost, most significant
factor; spin up first, as ls.spin(1/2) orders m from +S down), and solved
with ARPACK (scipy.sparse.linalg.eigsh, tol=0: machine precision) and
SuperLU (scipy.sparse.linalg.splu).  No symmetry sectors are used, as the
levelshift jobs build the same full-space operators.

Command line (one job, run once):

    peer_sparse.py JOB [size args] [options] [-v]

prints exactly one line on stdout

    JOB seconds=<wall> result=<key number> [name=value ...]

where <wall> is the in-process wall time of the job (building the operators
plus solving; interpreter start-up and imports excluded), as peer.py does.
Extra fields: `*_seconds` are timings of a part of the job, the others are
further numbers to compare.  With -v a breakdown goes to stderr.
`peer_sparse.py -h` lists the jobs.
"""
import argparse
import sys
import time

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as sla


# ---------------------------------------------------------------------------
# Building blocks: spin-1/2 chains as kron sums
# ---------------------------------------------------------------------------

SZ = sp.csr_matrix([[0.5, 0.0], [0.0, -0.5]])
SP = sp.csr_matrix([[0.0, 1.0], [0.0, 0.0]])          # S+ (up = first state)
SM = SP.T.tocsr()
SX = sp.csr_matrix([[0.0, 0.5], [0.5, 0.0]])


def embed(op, site, width, L):
    """op acting on sites site..site+width-1 (0-based) of an L-site chain, identity elsewhere."""
    return sp.kron(sp.kron(sp.identity(2 ** site, format="csr"), op, format="csr"),
                   sp.identity(2 ** (L - site - width), format="csr"), format="csr")


def bond(delta=1.0):
    """Sx Sx + Sy Sy + delta Sz Sz on two neighbouring spins: (S+ S- + S- S+)/2 + delta Sz Sz."""
    return (0.5 * (sp.kron(SP, SM) + sp.kron(SM, SP)) + delta * sp.kron(SZ, SZ)).tocsr()


def chain(L, delta=1.0):
    """Open XXZ chain sum_{i=1}^{L-1} (Sx Sx + Sy Sy + delta Sz Sz)_{i,i+1} (Heisenberg: delta = 1)."""
    b = bond(delta)
    return sum(embed(b, i, 2, L) for i in range(L - 1)).tocsr()


def field(L, op, signs=None):
    """sum_i s_i op_i over the L sites (s_i = 1, or the given signs)."""
    signs = np.ones(L) if signs is None else signs
    return sum(s * embed(op, i, 1, L) for i, s in enumerate(signs)).tocsr()


def lowest(h, k, v0=None):
    """Lowest k eigenvalues (ascending) and vectors of a sparse symmetric h, ARPACK to machine precision."""
    w, u = sla.eigsh(h, k=k, which="SA", tol=0, v0=v0)
    order = np.argsort(w)
    return w[order], u[:, order]


def log(*args):
    print(*args, file=sys.stderr)


# ---------------------------------------------------------------------------
# Jobs.  Each has build(args) -> inputs and solve(inputs, args) -> (result, extra)
# ---------------------------------------------------------------------------

# 1. chain_eigen: lowest levels of the Heisenberg chain in a transverse field

def build_chain_eigen(a):
    return (chain(a.sites) + a.h * field(a.sites, SX)).tocsr()


def solve_chain_eigen(h, a):
    w, _ = lowest(h, a.count)
    if a.verbose:
        log(f"# lowest {a.count}: {w}")
    return w[0], {f"e{a.count}": w[-1]}


# 2. xxz_series: Rayleigh-Schroedinger series of the XXZ ground level, staggered field

def build_xxz_series(a):
    signs = np.array([(-1.0) ** i for i in range(1, a.sites + 1)])    # (-1)^i, i = 1..L
    return chain(a.sites, a.delta), field(a.sites, SZ, signs)


def rs_bordered(h0, v, order, verbose=False):
    """RS energies E^(0..order) of the ground level of a sparse, non-diagonal h0.

    Intermediate normalisation <n|psi^(k)> = 0 (k >= 1):
        E^(k)  = <n| V |psi^(k-1)>
        (E0 - H0) psi^(k) = V psi^(k-1) - sum_{j=1}^{k} E^(j) psi^(k-j),
    the singular system solved through the bordered matrix
    [[E0 - H0, n], [n^T, 0]] [psi; mu] = [rhs; 0] (nonsingular, mu = <n|rhs>),
    factored once by SuperLU.  Returns (energies, seconds of eigsh alone).
    """
    t0 = time.perf_counter()
    (e0,), n = lowest(h0, 1)
    t_eig = time.perf_counter() - t0
    n = n[:, 0]
    dim = n.size
    border = sp.csc_matrix(n[:, None])
    m = sp.bmat([[e0 * sp.identity(dim, format="csc") - h0, border], [border.T, None]], format="csc")
    lu = sla.splu(m)
    psi = np.zeros((order, dim))                         # psi^(0..order-1)
    psi[0] = n
    energies = np.zeros(order + 1)
    energies[0] = e0
    for k in range(1, order + 1):
        v_psi = v @ psi[k - 1]
        energies[k] = n @ v_psi
        if k == order:
            break
        rhs = v_psi - energies[1:k + 1] @ psi[k - 1::-1]  # sum_{j=1}^{k} E^(j) psi^(k-j)
        psi[k] = lu.solve(np.append(rhs, 0.0))[:dim]
    if verbose:
        log(f"# eigsh {t_eig:.4f} s; splu nnz(L+U) = {lu.L.nnz + lu.U.nnz}")
    return energies, t_eig


def solve_xxz_series(inputs, a):
    h0, v = inputs
    e, t_eig = rs_bordered(h0, v, a.order, a.verbose)
    partial = np.polyval(e[::-1], a.lam)                 # sum_k E^(k) lambda^k
    if a.verbose:
        log(f"# E^(0..{a.order}) = {e}")
    return e[2], {"sum": partial, "eigsh_seconds": t_eig}


# 3. chain_sweep: lowest levels of H0 + p V on a grid of p, one eigsh per point

def build_chain_sweep(a):
    return chain(a.sites), field(a.sites, SX)


def solve_chain_sweep(inputs, a):
    h0, v = inputs
    ps = np.linspace(0.0, 1.0, a.points)
    levels = np.empty((ps.size, a.count))
    v0 = None
    for i, p in enumerate(ps):
        w, u = lowest((h0 + p * v).tocsr(), a.count, v0)
        levels[i] = w
        if not a.cold:
            v0 = u[:, 0]                                 # warm start: previous point's ground vector
    if a.verbose:
        log(f"# lowest {a.count} at p = 0: {levels[0]}; at p = 1: {levels[-1]}")
    return levels[-1, 0], {f"e{a.count}": levels[-1, -1]}


# 4. chain_build: the Hamiltonian of chain_eigen, built only

def solve_chain_build(h, a):
    # tr H^2 = sum of squared entries (H real symmetric); closed form
    # 3 (L-1) 2^(L-4) + h^2 L 2^(L-2) (traceless Pauli products, common practice)
    return h.nnz, {"trace_h2": float(h.data @ h.data)}


JOBS = {
    "chain_eigen": (build_chain_eigen, solve_chain_eigen),
    "xxz_series": (build_xxz_series, solve_xxz_series),
    "chain_sweep": (build_chain_sweep, solve_chain_sweep),
    "chain_build": (build_chain_eigen, solve_chain_build),
}


def parse_args(argv):
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = p.add_subparsers(dest="job", required=True)

    def job(name, help):
        s = sub.add_parser(name, help=help)
        s.add_argument("-v", "--verbose", action="store_true", help="breakdown to stderr")
        return s

    for name, help in [("chain_eigen", "lowest levels of the Heisenberg chain + h sum Sx, result E1"),
                       ("chain_build", "build that Hamiltonian only, result its number of nonzeros")]:
        s = job(name, help)
        s.add_argument("sites", type=int, nargs="?", default=12)
        s.add_argument("--h", type=float, default=0.3, help="transverse field (invented value)")
        s.add_argument("--count", type=int, default=4)

    s = job("xxz_series", "RS series of the XXZ ground level, V = staggered Sz, result E^(2)")
    s.add_argument("sites", type=int, nargs="?", default=16)
    s.add_argument("--delta", type=float, default=0.5, help="Sz Sz anisotropy (invented value)")
    s.add_argument("--order", type=int, default=8)
    s.add_argument("--lam", type=float, default=0.1, help="lambda of the partial sum")

    s = job("chain_sweep", "lowest levels of Heisenberg + p sum Sx, p = 0..1, result E1 at p = 1")
    s.add_argument("sites", type=int, nargs="?", default=14)
    s.add_argument("points", type=int, nargs="?", default=200)
    s.add_argument("--count", type=int, default=4)
    s.add_argument("--cold", action="store_true", help="random start vector at every point")

    sub.add_parser("noop", help="imports only (start-up cost)")
    return p.parse_args(argv)


def main(argv=None):
    a = parse_args(argv)
    if a.job == "noop":
        print("noop seconds=0 result=0")
        return
    build, solve = JOBS[a.job]
    t0 = time.perf_counter()
    inputs = build(a)
    t1 = time.perf_counter()
    result, extra = solve(inputs, a)
    t2 = time.perf_counter()
    tail = "".join(f" {key}={val:.16g}" for key, val in extra.items())
    print(f"{a.job} seconds={t2 - t0:.6f} result={result:.16g}{tail}")
    if a.verbose:
        log(f"# build={t1 - t0:.6f} solve={t2 - t1:.6f}")


if __name__ == "__main__":
    main()
