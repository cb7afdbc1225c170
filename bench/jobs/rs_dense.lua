-- bench job "rs_dense": the rs problem handed over in a random orthogonal
-- basis (same job as peer.py rs_dense 800 20): H0 = Q^T (N_op + 1/2) Q and
-- V = Q^T x^4 Q are dense, so ls.perturb must find H0's eigenpairs itself
-- (for one level: tridiagonal reduction and bordered solves).
-- Q is Haar-distributed: the eigenvectors of a GOE matrix (common practice;
-- the baseline takes the QR factor of a Gaussian matrix instead). Prints one
-- line; result = E^(2) = -21/8.
local n = (params and params.n) or 800
local K = (params and params.k) or 20
-- load the Lua sugar modules before the clock starts, as the baseline imports
-- NumPy/SciPy before its timer
local _ = ls.perturb, ls.sweep
-- open LAPACK/BLAS before the clock (levelshift opens them on first use),
-- as the baseline's imports load them before its timer
ls.linalg()
local t0 = ls.clock()
-- Gaussian entries by Box-Muller from Lua's generator (fixed seed)
math.randomseed(12345)
local rows = {}
for i = 1, n do rows[i] = {} end
-- upper triangle in order, two normals per Box-Muller draw
local random, log, sqrt, cos, sin, twopi = math.random, math.log, math.sqrt, math.cos, math.sin, 2 * math.pi
local spare = nil
for i = 1, n do
  local ri = rows[i]
  for j = i, n do
    local g
    if spare then
      g, spare = spare, nil
    else
      local r, t = sqrt(-2 * log(1 - random())), twopi * random()
      g, spare = r * cos(t), r * sin(t)
    end
    ri[j] = g
    rows[j][i] = g
  end
end
local _, Q = ls.eigen(ls.matrix(rows))
rows = nil
-- x^4 on the n kept levels (exact elements from the padded oscillator op)
local o = ls.oscillator(n)
local X4 = o.x ^ 4
local V4 = ls.zeros(n, n)
for i = 1, n do
  for off = -4, 4, 2 do
    local j = i + off
    if j >= 1 and j <= n then V4:set(i, j, (X4:get(i, j))) end
  end
end
local D = ls.zeros(n, n)
for i = 1, n do D:set(i, i, i - 0.5) end
local Qt = Q:adj()
local H0 = Qt * (D * Q)
local V = Qt * (V4 * Q)
local t1 = ls.clock()
local s = ls.perturb(H0, V, { order = K, levels = { 1 } })
local t2 = ls.clock()
io.write(string.format("rs_dense seconds=%.6f result=%.16g build=%.6f\n", t2 - t0, s:energy(1, 2), t1 - t0))
