-- bench job "xxz_series" (issue 15): Rayleigh-Schroedinger series of the
-- ground level of the open XXZ chain of L = 16 spins 1/2 (Delta = 0.5, an
-- invented value),
--   H0 = sum_{i=1}^{L-1} (Sx_i Sx_i+1 + Sy_i Sy_i+1 + Delta Sz_i Sz_i+1),
--   V  = sum_{i=1}^{L} (-1)^i Sz_i   (staggered field),
-- to order 8 on the full 2^L product basis (same job as
-- bench/peer_sparse.py xxz_series 16: eigsh for H0's ground pair, then one
-- SuperLU factorization of the bordered E0 - H0 and a solve per order).
-- Prints one line; result = E^(2), sum = the order-8 partial sum at
-- lambda = 0.1 (odd orders vanish: spin flip maps V to -V).
local L = (params and params.sites) or 16
local delta = (params and params.delta) or 0.5
local K = (params and params.order) or 8
local lam = (params and params.lam) or 0.1
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
local P = ls.product(ls.spin(0.5), L)
-- Sx Sx + Sy Sy = (S+ S- + S- S+) / 2
local H0 = ls.sum(1, L - 1, function(i)
  local a, b = P:site(i), P:site(i + 1)
  return 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp) + delta * (a.Sz * b.Sz)
end)
local V = ls.sum(1, L, function(i) return (i % 2 == 0 and 1 or -1) * P:site(i).Sz end)
local t1 = ls.clock()
local s = ls.perturb(H0, V, { order = K, levels = { 1 }, states = false })
local e2, sum = s:energy(1, 2), s:at(1, lam)
local t2 = ls.clock()
io.write(string.format("xxz_series seconds=%.6f result=%.16g sum=%.16g build=%.6f\n",
  t2 - t0, e2, sum, t1 - t0))
