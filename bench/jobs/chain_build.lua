-- bench job "chain_build" (issue 15): build the Hamiltonian of chain_eigen
-- (open Heisenberg chain of L spins 1/2 plus h sum Sx, h = 0.3 invented) on
-- the full 2^L product basis, nothing else (same job as
-- bench/peer_sparse.py chain_build L: a sum of scipy.sparse.kron products).
-- bench/run.py runs L = 12, 16, 18, 20 (jobs chain_build12 ... chain_build20).
-- Prints one line; result = stored entries, 2^L (1 + L) + (L - 1) 2^(L-1)
-- (diagonal, Sx flips, S+S- flips of antiparallel pairs).
local L = (params and params.sites) or 12
local h = (params and params.h) or 0.3
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
ls.linalg()
local t0 = ls.clock()
local P = ls.product(ls.spin(0.5), L)
-- S_i . S_j = Sz Sz + (S+ S- + S- S+) / 2
local H = ls.sum(1, L - 1, function(i)
  local a, b = P:site(i), P:site(i + 1)
  return a.Sz * b.Sz + 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp)
end) + h * ls.sum(1, L, function(i) return P:site(i).Sx end)
-- the op's entries written out (ops of a large product basis are kept as
-- sums of site terms until first use): inside the clock
local _, nnz = H:storage()
local t1 = ls.clock()
io.write(string.format("chain_build seconds=%.6f result=%d\n", t1 - t0, nnz))
