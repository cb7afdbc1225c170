-- bench job "chain_eigen" (issue 15): lowest 4 levels of the open Heisenberg
-- chain of L spins 1/2 in a transverse field (h = 0.3, an invented value),
--   H = sum_{i=1}^{L-1} S_i . S_{i+1} + h sum_{i=1}^{L} Sx_i,
-- on the full 2^L product basis (same job as bench/peer_sparse.py
-- chain_eigen L: eigsh k = 4, which = 'SA', tol = 0). bench/run.py runs
-- L = 12, 16, 18 (jobs chain_eigen12/16/18) and L = 20 by hand
-- (chain_eigen20, or `levelshift bench/jobs/chain_eigen.lua sites=20`).
-- Prints one line; result = lowest level, e4 = the 4th.
local L = (params and params.sites) or 12
local h = (params and params.h) or 0.3
local count = (params and params.count) or 4
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local P = ls.product(ls.spin(0.5), L)
-- S_i . S_j = Sz Sz + (S+ S- + S- S+) / 2
local H = ls.sum(1, L - 1, function(i)
  local a, b = P:site(i), P:site(i + 1)
  return a.Sz * b.Sz + 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp)
end) + h * ls.sum(1, L, function(i) return P:site(i).Sx end)
local t1 = ls.clock()
local E = ls.eigen(H, { count = count, vectors = false })
local t2 = ls.clock()
io.write(string.format("chain_eigen seconds=%.6f result=%.16g e%d=%.16g build=%.6f\n",
  t2 - t0, E[1], count, E[count], t1 - t0))
