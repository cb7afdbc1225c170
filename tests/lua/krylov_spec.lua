-- Krylov spectra (ARPACK) of large sparse Hermitian ops: lowest levels,
-- shift-invert around a target, complex ops, errors.
local ls = require "levelshift"

-- open chain of L spins 1/2: sum_i J (Sx Sx + Sy Sy + delta Sz Sz) + h sum Sx;
-- ring = true closes it
local function chain(L, opts)
  opts = opts or {}
  local P = ls.product(ls.spin(0.5), L)
  local J, delta, h = opts.J or 1, opts.delta or 1, opts.h or 0
  local last = opts.ring and L or L - 1
  local H = ls.sum(1, last, function(i)
    local a, b = P:site(i), P:site(i % L + 1)
    return J * (0.5 * (a.Sp * b.Sm + a.Sm * b.Sp) + delta * a.Sz * b.Sz)
  end)
  if h ~= 0 then H = H + h * ls.sum(1, L, function(i) return P:site(i).Sx end) end
  return H, P
end

-- the lowest `count` many-body levels of free fermions with single-particle
-- energies eps (every occupation pattern), by walking the 2^L patterns in
-- Gray-code order
local function free_fermion_levels(eps, count)
  local L = #eps
  local best = {}
  local e = 0.0
  local occ = {}
  for i = 1, L do occ[i] = false end
  local function keep(v)
    if #best < count then
      best[#best + 1] = v
      table.sort(best)
    elseif v < best[count] then
      best[count] = v
      table.sort(best)
    end
  end
  keep(e)
  for g = 1, (1 << L) - 1 do
    local bit = 1 -- lowest set bit of g
    while g & (1 << (bit - 1)) == 0 do bit = bit + 1 end
    occ[bit] = not occ[bit]
    e = e + (occ[bit] and eps[bit] or -eps[bit])
    keep(e)
  end
  return best
end

describe("Krylov spectra", function()
  it("gives the free-fermion levels of the open XX chain (L = 16)", function()
    -- source: E. Lieb, T. Schultz, D. Mattis, Ann. Phys. 16, 407 (1961):
    -- H = J sum (Sx Sx + Sy Sy) = (J/2) sum (S+ S- + h.c.) is a chain of free
    -- fermions with hopping J/2; open ends: eps_k = J cos(k pi/(L+1)),
    -- k = 1..L, and each level is a sum of occupied eps_k
    local L, J = 16, 1.173
    local H = chain(L, { J = J, delta = 0 })
    local eps = {}
    for k = 1, L do eps[k] = J * math.cos(k * math.pi / (L + 1)) end
    local want = free_fermion_levels(eps, 6)
    local E = ls.eigen(H, { count = 6, vectors = false, method = "krylov" })
    for k = 1, 6 do assert.near(want[k], E[k], 1e-10) end
    -- the default method takes ARPACK for the large Sz sectors by itself
    local Ea = ls.eigen(H, { count = 6, vectors = false })
    for k = 1, 6 do assert.near(want[k], Ea[k], 1e-10) end
  end)

  it("gives the free-fermion levels of the open XX chain at L = 20 (1048576 states)", function()
    -- the same closed form (Lieb, Schultz, Mattis 1961); 21 total-Sz
    -- sectors, the largest 184756 states, each by ARPACK
    local L, J = 20, 0.917
    local H = chain(L, { J = J, delta = 0 })
    local eps = {}
    for k = 1, L do eps[k] = J * math.cos(k * math.pi / (L + 1)) end
    local want = free_fermion_levels(eps, 3)
    local E = ls.eigen(H, { count = 3, vectors = false })
    for k = 1, 3 do assert.near(want[k], E[k], 1e-10) end
  end)

  it("approaches the Bethe-ansatz ground energy per site of the Heisenberg ring", function()
    -- source: L. Hulthen, Ark. Mat. Astron. Fys. 26A, No. 11 (1938) (Bethe
    -- ansatz, H. Bethe, Z. Phys. 71, 205 (1931)): e_inf = 1/4 - ln 2 per site
    -- for H = sum S_i . S_{i+1}; finite rings lie below it by
    -- pi v c/(6 L^2) = pi^2/(12 L^2) (v = pi/2, c = 1: H. W. J. Bloete, J. L.
    -- Cardy, M. P. Nightingale, Phys. Rev. Lett. 56, 742 (1986); I. Affleck,
    -- ibid. 746), up to logarithmic corrections
    local einf = 0.25 - math.log(2)
    local prev
    for _, L in ipairs { 10, 12, 14 } do
      local H = chain(L, { ring = true })
      local E = ls.eigen(H, { count = 1, vectors = false, method = "krylov" })
      local dev = E[1] / L - einf
      assert.is_true(dev < 0)
      assert.near(-math.pi ^ 2 / (12 * L * L), dev, 0.25 * math.pi ^ 2 / (12 * L * L))
      if prev then assert.is_true(math.abs(dev) < math.abs(prev)) end
      prev = dev
    end
  end)

  it("agrees with the dense solver on a chain in a transverse field, with vectors", function()
    local H = chain(11, { delta = 0.83, h = 0.37 }) -- no conserved Sz: one sector of 2048 states
    local Ed = ls.eigen(H, { count = 5, vectors = false, method = "dense" })
    local E, U = ls.eigen(H, { count = 5, method = "krylov" })
    for k = 1, 5 do assert.near(Ed[k], E[k], 1e-10) end
    local rows, cols = U:dim()
    assert.are.equal(2048, rows)
    assert.are.equal(5, cols)
    -- residuals and orthonormality of the returned vectors (common practice)
    local D = U:adj() * (H * U)
    for a = 1, 5 do
      for b = 1, 5 do
        assert.near(a == b and E[a] or 0, (D:get(a, b)), 1e-9)
      end
    end
    local G = U:adj() * U
    for a = 1, 5 do assert.near(1, (G:get(a, a)), 1e-12) end
    assert.near(0, (G:get(1, 4)), 1e-12)
  end)

  it("finds the levels nearest a target inside the spectrum by shift-invert", function()
    local H = chain(10, { delta = 0.61, h = 0.29 })
    local all = ls.eigen(H, { vectors = false, method = "dense" })
    local target = 0.5 * (all[400] + all[401]) + 0.01 * (all[401] - all[400])
    local E, U = ls.eigen(H, { count = 4, near = target, method = "krylov" })
    -- the 4 nearest from the full dense spectrum (common practice)
    local d = {}
    for k, e in ipairs(all) do d[k] = { math.abs(e - target), e } end
    table.sort(d, function(x, y) return x[1] < y[1] end)
    local want = { d[1][2], d[2][2], d[3][2], d[4][2] }
    table.sort(want)
    for k = 1, 4 do assert.near(want[k], E[k], 1e-10) end
    local D = U:adj() * (H * U)
    for k = 1, 4 do assert.near(E[k], (D:get(k, k)), 1e-9) end
    -- the dense method with near gives the same levels
    local Ed = ls.eigen(H, { count = 4, near = target, method = "dense", vectors = false })
    for k = 1, 4 do assert.near(want[k], Ed[k], 1e-10) end
  end)

  it("solves complex Hermitian ops (a chain with a Dzyaloshinskii-Moriya term)", function()
    local L = 10
    local H, P = chain(L, { delta = 0.7, h = 0.21 })
    -- D (Sx_i Sy_j - Sy_i Sx_j): Hermitian with imaginary entries
    H = H + ls.sum(1, L - 1, function(i)
      local a, b = P:site(i), P:site(i + 1)
      return 0.43 * (a.Sx * b.Sy - a.Sy * b.Sx)
    end)
    local Ed = ls.eigen(H, { count = 4, vectors = false, method = "dense" })
    local E, U = ls.eigen(H, { count = 4, method = "krylov" })
    for k = 1, 4 do assert.near(Ed[k], E[k], 1e-10) end
    local D = U:adj() * (H * U)
    for k = 1, 4 do assert.near(E[k], (D:get(k, k)), 1e-9) end
    local En = ls.eigen(H, { count = 3, near = 0.1, method = "krylov", vectors = false })
    local En2 = ls.eigen(H, { count = 3, near = 0.1, method = "dense", vectors = false })
    for k = 1, 3 do assert.near(En2[k], En[k], 1e-10) end
  end)

  it("reports what a solve cost through stats = {}", function()
    -- conserves Sz: 11 sectors of C(10, k) states (common practice)
    local H = chain(10, { delta = 0.5 })
    local st = {}
    ls.eigen(H, { count = 2, vectors = false, stats = st })
    assert.are.equal(3, st.krylov_sectors) -- C(10, k) > 200 for k = 4, 5, 6
    assert.are.equal(6, st.dense_sectors) -- k = 1, 2, 3, 7, 8, 9 (k = 0, 10: one state each)
    assert.is_true(st.products > 0 and st.restarts > 0)
    local sd = {}
    ls.eigen(H, { count = 2, vectors = false, method = "dense", stats = sd })
    assert.are.equal(0, sd.krylov_sectors)
    assert.are.equal(0, sd.products)
    assert.error_matches(function() ls.eigen(H, { stats = 3 }) end, "option 'stats' must be a table", 1, true)
  end)

  it("refuses impossible requests before any work", function()
    -- 2e6 states: the vectors alone need 3.2e4 GB; the cap check comes first
    local o = ls.oscillator(2000000)
    local t0 = ls.clock()
    assert.error_matches(function() ls.eigen(o.x) end, "dense cap", 1, true)
    assert.is_true(ls.clock() - t0 < 30) -- (a guard against hours, not a speed test)
  end)

  it("reports bad options and numerical failures clearly", function()
    local H = chain(10, { delta = 0.5, h = 0.3 })
    assert.error_matches(function() ls.eigen(H, { method = "lanczos" }) end,
      "bad argument #2 to 'eigen' (option 'method' must be \"auto\", \"dense\" or \"krylov\")", 1, true)
    assert.error_matches(function() ls.eigen(H, { near = 0 / 0 }) end,
      "bad argument #2 to 'eigen' (option 'near' must be a finite number)", 1, true)
    assert.error_matches(function() ls.eigen(H, { tol = -1 }) end, "option 'tol' must be", 1, true)
    assert.error_matches(function() ls.eigen(H, { count = 4, ncv = 3 }) end,
      "option 'ncv' must be from count + 1 = 5 to 1024, got 3", 1, true)
    assert.error_matches(function() ls.eigen(H, { near = 1e3, count = 2 }) end,
      "option 'near': near = 1000 lies outside the spectrum's range", 1, true)
    assert.error_matches(function() ls.eigen(ls.matrix { { 1, 0 }, { 0, 2 } }, { method = "krylov" }) end,
      "'krylov' needs a sparse matrix", 1, true)
    -- a target exactly on a level: the path graph of odd size n has the
    -- eigenvalue 2 cos(k pi/(n+1)) = 0 at k = (n+1)/2 (common practice), so
    -- H - 0 is singular
    local B = ls.basis(1501)
    local Hp = B:matrix(function(a, b) return math.abs(a.index - b.index) == 1 and 1 or 0 end)
    assert.error_matches(function() ls.eigen(Hp, { count = 2, near = 0, method = "krylov" }) end,
      "option 'near': near = 0 is on a level: H - near is singular", 1, true)
    -- no convergence within the restarts allowed: names tol and restarts
    local ok, err = pcall(ls.eigen, H, { count = 4, method = "krylov", maxiter = 1, tol = 1e-15 })
    assert.is_false(ok)
    assert.matches("did not converge", err, 1, true)
    assert.matches("restarts", err, 1, true)
    assert.matches("tol 1e-15", err, 1, true)
  end)
end)
