-- Ops of a product basis held as sums of site terms (csrc/core/localsum.c):
-- written out once, they must equal the Kronecker products they stand for
-- and the ops built one product at a time; the spin-chain spectra through
-- them keep their closed forms.
local ls = require "levelshift"

-- spin matrices in the basis m = S, S-1, ..., -S (Sakurai, Modern Quantum
-- Mechanics, 1994, eqs. 3.5.40-41: <m+1|S+|m> = sqrt(S(S+1) - m(m+1))),
-- as plain Lua tables of {re, im}
local function spin_tables(S)
  local d = math.floor(2 * S + 0.5) + 1
  local function zero()
    local t = {}
    for i = 1, d do
      t[i] = {}
      for j = 1, d do t[i][j] = {0, 0} end
    end
    return t
  end
  local Sz, Sp, Sm, Sx, Sy = zero(), zero(), zero(), zero(), zero()
  for j = 1, d do
    local m = S - (j - 1)
    Sz[j][j] = {m, 0}
    if j > 1 then -- S+ |m> = c |m+1>, row j - 1
      local c = math.sqrt(S * (S + 1) - m * (m + 1))
      Sp[j - 1][j] = {c, 0}
      Sm[j][j - 1] = {c, 0}
    end
  end
  for i = 1, d do
    for j = 1, d do -- Sx = (S+ + S-)/2, Sy = (S+ - S-)/(2i)
      Sx[i][j] = {(Sp[i][j][1] + Sm[i][j][1]) / 2, 0}
      Sy[i][j] = {0, -(Sp[i][j][1] - Sm[i][j][1]) / 2}
    end
  end
  return {Sz = Sz, Sp = Sp, Sm = Sm, Sx = Sx, Sy = Sy, d = d}
end

-- entry (r, c) of c0 * (x)_s f_s (identity where a site has no factor):
-- the definition of the Kronecker product, first site slowest (the order
-- ls.product documents)
local function kron_entry(dims, factors, r, c)
  local re, im = 1, 0
  local rr, cc = r - 1, c - 1
  local stride = 1
  for s = 1, #dims do stride = stride * dims[s] end
  for s = 1, #dims do
    stride = stride // dims[s]
    local a, b = rr // stride, cc // stride
    rr, cc = rr % stride, cc % stride
    local f = factors[s]
    local vr, vi
    if f then
      vr, vi = f[a + 1][b + 1][1], f[a + 1][b + 1][2]
    else
      vr, vi = (a == b) and 1 or 0, 0
    end
    re, im = re * vr - im * vi, re * vi + im * vr
  end
  return re, im
end

-- worst |a_ij - ref(i, j)| over all entries, against the scale of ref
local function worst_against(a, ref)
  local n = a:dim()
  local worst, scale = 0, 0
  for i = 1, n do
    for j = 1, n do
      local re, im = a:get(i, j)
      local rr, ri = ref(i, j)
      scale = math.max(scale, math.abs(rr), math.abs(ri))
      worst = math.max(worst, math.abs(re - rr), math.abs(im - ri))
    end
  end
  return worst, scale
end

describe("site sums", function()
  -- a mixed chain: spins 1, 1/2, 1/2, 1, 1/2 (72 states)
  local spins = {1, 0.5, 0.5, 1, 0.5}
  local function mixed()
    local sites = {}
    for k, S in ipairs(spins) do sites[k] = ls.spin(S) end
    return ls.product(table.unpack(sites))
  end
  -- H = sum_i [Sz Sz + (S+ S- + S- S+)/2]_(i,i+1) + 0.3i Sy_1 Sx_2 - 2
  --     + 3 Sz_1^2 - Sy_2 / 2 - Sx_3 + 0.7 sum_i Sx_i
  local function model(op)
    local H = ls.sum(1, #spins - 1, function(i)
      local a, b = op(i), op(i + 1)
      return a("Sz") * b("Sz") + 0.5 * (a("Sp") * b("Sm") + a("Sm") * b("Sp"))
    end)
    H = H + 0.3 * ls.I * op(1)("Sy") * op(2)("Sx") - 2 + op(1)("Sz") ^ 2 * 3 - op(2)("Sy") / 2 + (-op(3)("Sx"))
    return H + 0.7 * ls.sum(1, #spins, function(i) return op(i)("Sx") end)
  end
  -- the same model from the tables, entry by entry
  local function reference(i, j)
    local T, dims = {}, {}
    for k, S in ipairs(spins) do T[k] = spin_tables(S); dims[k] = T[k].d end
    local re, im = 0, 0
    local function add(c, f)
      local r, m = kron_entry(dims, f, i, j)
      re, im = re + c[1] * r - c[2] * m, im + c[1] * m + c[2] * r
    end
    for b = 1, #spins - 1 do
      add({1, 0}, {[b] = T[b].Sz, [b + 1] = T[b + 1].Sz})
      add({0.5, 0}, {[b] = T[b].Sp, [b + 1] = T[b + 1].Sm})
      add({0.5, 0}, {[b] = T[b].Sm, [b + 1] = T[b + 1].Sp})
    end
    add({0, 0.3}, {T[1].Sy, T[2].Sx})
    add({-2, 0}, {})
    local sz2 = {}
    for a = 1, 3 do
      sz2[a] = {}
      for b = 1, 3 do sz2[a][b] = {a == b and T[1].Sz[a][a][1] ^ 2 or 0, 0} end
    end
    add({3, 0}, {sz2})
    add({-0.5, 0}, {[2] = T[2].Sy})
    add({-1, 0}, {[3] = T[3].Sx})
    for s = 1, #spins do add({0.7, 0}, {[s] = T[s].Sx}) end
    return re, im
  end

  it("equal the Kronecker products they stand for (mixed spins, complex terms)", function()
    local P = mixed()
    local H = model(function(i) return function(name) return ls._site_sum(P, i, name) end end)
    assert.is_true(ls._is_site_sum(H))
    assert.is_true(H:is_complex())
    local worst, scale = worst_against(H, reference)
    assert.is_true(worst <= 1e-14 * scale, "worst entry differs by " .. worst)
    assert.is_false(ls._is_site_sum(H)) -- written out by the first get
  end)

  it("equal the ops built one product at a time, entry for entry", function()
    local P = mixed()
    local A = model(function(i) return function(name) return P:site(i)[name] end end)
    local B = model(function(i) return function(name) return ls._site_sum(P, i, name) end end)
    assert.is_false(ls._is_site_sum(A)) -- 72 states: built directly
    local worst, scale = worst_against(B, function(i, j) return A:get(i, j) end)
    assert.is_true(worst <= 1e-15 * scale, "worst entry differs by " .. worst)
    local ka, na = A:storage()
    local kb, nb = B:storage()
    assert.are.equal(ka, kb)
    assert.are.equal(na, nb)
  end)

  it("keep products past the term limit on the general path, with the same entries", function()
    -- (sum_i Sz_i)^2 squared: 8^2 = 64 terms, then 64 * 64 = 4096 pairs,
    -- then past 4096: written out and multiplied as ops
    local P = ls.product(ls.spin(0.5), 8)
    local M = ls.sum(1, 8, function(i) return ls._site_sum(P, i, "Sz") end)
    local M2 = M * M
    assert.is_true(ls._is_site_sum(M2))
    local M4 = M2 * M2
    local M8 = M4 * M2 -- 4096 * 64 terms: the general path
    assert.is_false(ls._is_site_sum(M8))
    -- (sum_i Sz_i) is diagonal with value (number of up spins) - 4: the
    -- 6th power of that, state by state (common practice)
    local worst = 0
    for s = 1, 256 do
      local up, x = 0, s - 1
      for _ = 1, 8 do up = up + (1 - (x % 2)); x = x // 2 end
      local m = up - 4
      worst = math.max(worst, math.abs(M8:get(s, s) - m ^ 6))
    end
    assert.is_true(worst <= 1e-9, "worst diagonal entry differs by " .. worst)
  end)

  it("count the entries of the transverse-field Heisenberg chain", function()
    -- L = 12 (4096 states): built as site sums by ls.product/ls.sum;
    -- entries: the diagonal 2^L, the Sx flips L 2^L, the flip-flops of the
    -- (L - 1) 2^(L-1) antiparallel pairs (counting, common practice)
    local L = 12
    local P = ls.product(ls.spin(0.5), L)
    local H = ls.sum(1, L - 1, function(i)
      local a, b = P:site(i), P:site(i + 1)
      return a.Sz * b.Sz + 0.5 * (a.Sp * b.Sm + a.Sm * b.Sp)
    end) + 0.3 * ls.sum(1, L, function(i) return P:site(i).Sx end)
    assert.is_true(ls._is_site_sum(H))
    local r, c = H:dim()
    assert.are.equal(4096, r); assert.are.equal(4096, c)
    assert.is_true(ls._is_site_sum(H)) -- dim() does not write it out
    local kind, nnz = H:storage()
    assert.are.equal("sparse", kind)
    assert.are.equal(2 ^ L * (1 + L) + (L - 1) * 2 ^ (L - 1), nnz)
    assert.is_true((H:is_hermitian()))
  end)

  it("give the free-fermion levels of the open XX chain (L = 12)", function()
    -- H = sum (Sx Sx + Sy Sy) = 1/2 sum (S+ S- + S- S+): free fermions with
    -- energies cos(pi k / (L + 1)), k = 1..L (Lieb, Schultz, Mattis, Ann.
    -- Phys. 16, 407 (1961)); the ground level fills every negative one, the
    -- next ones leave out or add the one nearest zero
    local L = 12
    local P = ls.product(ls.spin(0.5), L)
    local H = ls.sum(1, L - 1, function(i)
      local a, b = P:site(i), P:site(i + 1)
      return a.Sx * b.Sx + a.Sy * b.Sy
    end)
    assert.is_true(ls._is_site_sum(H))
    local eps = {}
    for k = 1, L do eps[k] = math.cos(math.pi * k / (L + 1)) end
    local E0 = 0
    for k = 1, L do if eps[k] < 0 then E0 = E0 + eps[k] end end
    local E = ls.eigen(H, {count = 1, vectors = false})
    assert.is_true(math.abs(E[1] - E0) <= 1e-10, "E0 " .. E[1] .. " vs " .. E0)
  end)

  it("keep the labels of a large product without storing them per state", function()
    local P = ls.product(ls.spin(0.5), ls.spin(1), ls.spin(0.5), ls.spin(0.5))
    local Q = ls.product(ls.spin(0.5), 20) -- 1048576 states
    -- state k (1-based) of a product is the digits of k - 1, first site
    -- slowest, digit 0 = m = +1/2 (the order ls.product documents)
    local k = 699051 -- 0b10101010101010101010 + 1
    local lab = Q:labels(k)
    for s = 1, 20 do
      local bit = ((k - 1) >> (20 - s)) & 1
      assert.are.equal(bit == 0 and 0.5 or -0.5, lab[s])
    end
    assert.are.equal(k, Q:find(lab))
    assert.are.equal(2 * 3 * 2 * 2, P:dim())
    -- digits 0, 2, 1, 0: ((0 * 3 + 2) * 2 + 1) * 2 + 0 = 10
    assert.are.equal(11, P:find{0.5, -1, -0.5, 0.5})
  end)

  it("refuse what they cannot hold with clear errors", function()
    local P = ls.product(ls.spin(0.5), 4)
    local Q = ls.product(ls.spin(1), 4)
    local a, b = ls._site_sum(P, 1, "Sz"), ls._site_sum(Q, 1, "Sz")
    local ok, e = pcall(function() return a + b end)
    assert.is_false(ok)
    assert.is_truthy(tostring(e):find("dimension mismatch", 1, true), e)
    ok, e = pcall(ls._site_sum, P, 1, "Q")
    assert.is_false(ok)
    assert.is_truthy(tostring(e):find("no operator 'Q'", 1, true), e)
    ok, e = pcall(ls._site_sum, P, 5, "Sz")
    assert.is_false(ok)
    assert.is_truthy(tostring(e):find("out of range", 1, true), e)
    local O = ls.product(ls.oscillator(4), ls.oscillator(4))
    ok, e = pcall(ls._site_sum, O, 1, "x")
    assert.is_false(ok)
    assert.is_truthy(tostring(e):find("padded", 1, true), e)
    ok, e = pcall(function() return a / 0 end)
    assert.is_false(ok)
    assert.is_truthy(tostring(e):find("division by zero", 1, true), e)
    ok, e = pcall(function() return a * (0 / 0) end)
    assert.is_false(ok)
    assert.is_truthy(tostring(e):find("NaN", 1, true), e)
  end)
  it("place a user's matrix on one site: the Kronecker product, kept as a site sum when large", function()
    -- I (x) M (x) I by definition (common practice), M complex Hermitian on a spin-1 site
    local P = mixed() -- 72 states: built directly
    local M = ls.matrix { { 1, 2, 0 }, { 2, 0, 3 * ls.I }, { 0, -3 * ls.I, 5 } }
    local Mt = { { { 1, 0 }, { 2, 0 }, { 0, 0 } }, { { 2, 0 }, { 0, 0 }, { 0, 3 } }, { { 0, 0 }, { 0, -3 }, { 5, 0 } } }
    local dims = {}
    for k, S in ipairs(spins) do dims[k] = math.floor(2 * S + 0.5) + 1 end
    local A = P:place(4, M)
    assert.is_false(ls._is_site_sum(A))
    local worst = worst_against(A, function(i, j) return kron_entry(dims, { [4] = Mt }, i, j) end)
    assert.are.equal(0, worst)
    -- 1024 states: a site sum, equal to the same matrix made from the site's own operators
    local Q = ls.product(ls.spin(0.5), 10)
    local X = ls.matrix { { 0, 0.5 }, { 0.5, 0 } } -- Sx of spin 1/2
    local B = Q:place(7, X) * Q:site(2).Sz
    assert.is_true(ls._is_site_sum(B))
    local C = Q:site(7).Sx * Q:site(2).Sz
    local _, nb = B:storage()
    local _, nc = C:storage()
    assert.are.equal(nc, nb)
    for i = 1, 1024, 37 do
      for j = 1, 1024, 29 do assert.are.equal(C:get(i, j), B:get(i, j)) end
    end
    local ok, e = pcall(function() return P:place(2, M) end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("site 2 has 2 states, the matrix is 3x3", 1, true), e)
    ok, e = pcall(function() return ls.product(ls.oscillator(3), ls.spin(0.5)):place(1, ls.matrix { { 1, 0, 0 }, { 0, 1, 0 }, { 0, 0, 1 } }) end)
    assert.is_false(ok)
    assert.truthy(tostring(e):find("keeps padded levels", 1, true), e)
  end)
end)
