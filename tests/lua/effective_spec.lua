-- Effective Hamiltonians of a group of levels (Bloch wave operator + des
-- Cloizeaux symmetrization = canonical Van Vleck / Schrieffer-Wolff).
local ls = require "levelshift"

local function re(m, i, j) return (m:get(i, j)) end
local function cx(m, i, j) local a, b = m:get(i, j); return { a, b or 0 } end

-- Hubbard dimer, two electrons, S_z = 0. Basis |up,dn>, |dn,up>, |updn,0>,
-- |0,updn>; hopping -t with one fermion-order convention (signs as in
-- ../shared/METHODS.md section 2).
local function hubbard(t, U)
  local H0 = ls.matrix{ { 0, 0, 0, 0 }, { 0, 0, 0, 0 }, { 0, 0, U, 0 }, { 0, 0, 0, U } }
  local V = ls.matrix{ { 0, 0, -t, -t }, { 0, 0, t, t }, { -t, t, 0, 0 }, { -t, t, 0, 0 } }
  return H0, V
end

-- the lowest k eigenvalues of an op
local function low(m, k) local E = ls.eigen(m, { vectors = false }); local r = {}; for i = 1, k do r[i] = E[i] end; return r end

-- a fixed real symmetric / complex Hermitian "random" coupling
local function coupling(n, complex)
  local rows = {}
  for i = 1, n do rows[i] = {} end
  for i = 1, n do
    for j = i, n do
      local a = math.sin(1.7 * i + 2.3 * j) * 0.5 + 0.1
      local b = complex and (i ~= j) and math.cos(0.9 * i - 1.3 * j) * 0.4 or 0
      rows[i][j] = { a, b }; rows[j][i] = { a, -b }
    end
  end
  local V = ls.zeros(n, n, complex and "complex" or nil)
  for i = 1, n do for j = 1, n do V:set(i, j, rows[i][j][1], rows[i][j][2]) end end
  return V
end

local function diag(list)
  local rows = {}
  for i = 1, #list do
    rows[i] = {}
    for j = 1, #list do rows[i][j] = (i == j) and list[i] or 0 end
  end
  return ls.matrix(rows)
end

-- complex helpers on {re, im}
local function cmul(a, b) return { a[1] * b[1] - a[2] * b[2], a[1] * b[2] + a[2] * b[1] } end
local function cadd(a, b) return { a[1] + b[1], a[2] + b[2] } end
local function cscale(s, a) return { s * a[1], s * a[2] } end

describe("effective", function()
  it("gives the Hubbard-dimer exchange J = 4t^2/U at second order", function()
    -- source: Anderson, Phys. Rev. 115, 2 (1959) (superexchange J = 4t^2/U);
    -- matrix form (J/2)[[-1, 1], [1, -1]] from ../shared/METHODS.md section 2
    local t, U = 1.0, 20.0
    local J = 4 * t * t / U
    local h = ls.effective(hubbard(t, U), select(2, hubbard(t, U)), { levels = { 1, 2 }, order = 2 })
    assert.are.same({ 1, 2 }, h:group())
    assert.are.equal(2, h:dim())
    local H2 = h:term(2)
    assert.near(-J / 2, re(H2, 1, 1), 1e-14); assert.near(J / 2, re(H2, 1, 2), 1e-14)
    assert.near(J / 2, re(H2, 2, 1), 1e-14); assert.near(-J / 2, re(H2, 2, 2), 1e-14)
    local E = low(h:at(1), 2)
    assert.near(-J, E[1], 1e-14); assert.near(0, E[2], 1e-14)
    assert.near(0, re(h:term(1), 1, 2), 1e-15)
    assert.are.same({}, h:warnings())
  end)

  it("reaches 16 t^4/U^3 at fourth order, the expansion of the exact singlet", function()
    -- source: exact singlet (U - sqrt(U^2 + 16 t^2))/2 expanded:
    -- -4t^2/U + 16t^4/U^3 - ... (from memory; ../shared/METHODS.md section 2)
    local t, U = 1.0, 10.0
    local H0, V = hubbard(t, U)
    local h = ls.effective(H0, V, { levels = { 1, 2 }, order = 4 })
    local E4 = ls.eigen(h:term(4), { vectors = false }) -- (8t^4/U^3)[[1,-1],[-1,1]]
    assert.near(0, E4[1], 1e-15); assert.near(16 * t ^ 4 / U ^ 3, E4[2], 1e-15)
    local E = low(h:at(1), 1)[1]
    assert.near(-4 * t ^ 2 / U + 16 * t ^ 4 / U ^ 3, E, 1e-14)
    local exact = (U - math.sqrt(U * U + 16 * t * t)) / 2
    assert.near(-128 * t ^ 6 / U ^ 5, exact - E, 20 * t ^ 8 / U ^ 7 * 64) -- next term -128 t^6/U^5
    assert.near(0, re(h:term(3), 1, 1), 1e-15)
  end)

  it("gives the Jaynes-Cummings dispersive shift g^2/Delta", function()
    -- source: Blais et al., Phys. Rev. A 69, 062320 (2004): qubit frequency
    -- w_q + (2n + 1) g^2/Delta with Delta = w_q - w_r
    local wq, wr, g = 1.0, 1.5, 0.01
    local P = ls.product(ls.spin(0.5), ls.oscillator(6))
    local q, r = P:site(1), P:site(2)
    local H0 = wq * q.Sz + wr * r.number
    local V = g * (q.Sp * r.lower + q.Sm * r.raise)
    local D = wq - wr
    -- levels 1, 2 are |dn,0> (-0.5) and |up,0> (0.5); 3, 4 are |dn,1>, |up,1>
    local h0 = ls.effective(H0, V, { levels = { 1, 2 }, order = 2 })
    local H = h0:at(1)
    assert.near(-0.5, re(H, 1, 1), 1e-14)
    assert.near(0.5 + g * g / D, re(H, 2, 2), 1e-14)
    assert.near(0, re(H, 1, 2), 1e-15)
    local h1 = ls.effective(H0, V, { window = { 0.9, 2.1 }, order = 2 })
    assert.are.same({ 3, 4 }, h1:group())
    local E = ls.eigen(h1:at(1))
    assert.near(wq + 3 * g * g / D, E[2] - E[1], 1e-12)
  end)

  it("reproduces the two-level closed form -g^2/D + g^4/D^3 - 2g^6/D^5", function()
    -- source: expansion of (D - sqrt(D^2 + 4g^2))/2 (from memory; ../shared/METHODS.md section 2)
    local g, D = 0.1, 1.0
    local h = ls.effective(ls.matrix{ { 0, 0 }, { 0, D } }, ls.matrix{ { 0, g }, { g, 0 } }, { levels = { 1 }, order = 7 })
    assert.near(-g ^ 2 / D, re(h:term(2), 1, 1), 1e-16)
    assert.near(g ^ 4 / D ^ 3, re(h:term(4), 1, 1), 1e-17)
    assert.near(-2 * g ^ 6 / D ^ 5, re(h:term(6), 1, 1), 1e-18)
    assert.near(0, re(h:term(3), 1, 1), 1e-18)
    assert.near(0, re(h:term(7), 1, 1), 1e-18)
    -- the upper level, selected by a window
    local hu = ls.effective(ls.matrix{ { 0, 0 }, { 0, D } }, ls.matrix{ { 0, g }, { g, 0 } }, { window = { 0.5, 2 }, order = 6 })
    assert.are.same({ 2 }, hu:group())
    assert.near(D + g ^ 2 / D - g ^ 4 / D ^ 3 + 2 * g ^ 6 / D ^ 5, re(hu:at(1), 1, 1), 1e-15)
  end)

  it("has eigenvalue errors falling like lambda^(K+1) for a quasi-degenerate group", function()
    -- source: common practice (order-K truncation error); ratios 2^(K+1) on
    -- halving lambda as in ../shared/METHODS.md section 2
    local H0 = diag{ 0, 0.01, 1, 1.7, 2.3 }
    local V = coupling(5, false)
    for K = 1, 5 do
      local h = ls.effective(H0, V, { levels = { 1, 2 }, order = K })
      local errs = {}
      for s, lam in ipairs{ 0.04, 0.02 } do
        local Eeff, Eex = low(h:at(lam), 2), low(H0 + lam * V, 2)
        errs[s] = math.max(math.abs(Eeff[1] - Eex[1]), math.abs(Eeff[2] - Eex[2]))
      end
      local ratio = errs[1] / errs[2]
      assert.is_true(ratio > 0.6 * 2 ^ (K + 1) and ratio < 1.5 * 2 ^ (K + 1),
        ("K = %d: ratio %.3g, want ~%d"):format(K, ratio, 2 ^ (K + 1)))
    end
  end)

  it("handles complex Hermitian V: second and third order match the explicit formulas", function()
    -- source: Winkler, Spin-Orbit Coupling Effects in 2D Electron and Hole
    -- Systems, Springer 2003, App. B (from memory, as in ../shared/METHODS.md section 2)
    local Es = { 0, 1, 1.3, 3, 4.2 }
    local H0 = diag(Es)
    local V = coupling(5, true)
    local Pl, Ql = { 2, 3 }, { 1, 4, 5 }
    local h = ls.effective(H0, V, { levels = Pl, order = 3 })
    local H2, H3 = h:term(2), h:term(3)
    assert.is_true(H2:is_complex())
    local v = function(i, j) return cx(V, i, j) end
    for ia, a in ipairs(Pl) do
      for ib, b in ipairs(Pl) do
        local s2 = { 0, 0 }
        for _, m in ipairs(Ql) do
          local w = 0.5 * (1 / (Es[a] - Es[m]) + 1 / (Es[b] - Es[m]))
          s2 = cadd(s2, cscale(w, cmul(v(a, m), v(m, b))))
        end
        local got = cx(H2, ia, ib)
        assert.near(s2[1], got[1], 1e-13); assert.near(s2[2], got[2], 1e-13)
        local s3 = { 0, 0 }
        for _, m in ipairs(Ql) do
          for _, c in ipairs(Pl) do
            s3 = cadd(s3, cscale(-0.5 / ((Es[b] - Es[m]) * (Es[c] - Es[m])), cmul(cmul(v(a, m), v(m, c)), v(c, b))))
            s3 = cadd(s3, cscale(-0.5 / ((Es[a] - Es[m]) * (Es[c] - Es[m])), cmul(cmul(v(a, c), v(c, m)), v(m, b))))
          end
          for _, m2 in ipairs(Ql) do
            local w = 0.5 * (1 / ((Es[a] - Es[m]) * (Es[a] - Es[m2])) + 1 / ((Es[b] - Es[m]) * (Es[b] - Es[m2])))
            s3 = cadd(s3, cscale(w, cmul(cmul(v(a, m), v(m, m2)), v(m2, b))))
          end
        end
        got = cx(H3, ia, ib)
        assert.near(s3[1], got[1], 1e-13); assert.near(s3[2], got[2], 1e-13)
      end
    end
    -- and the eigenvalue error still falls like lambda^4 (common practice)
    local errs = {}
    for s, lam in ipairs{ 0.04, 0.02 } do
      local Eeff, Eall = ls.eigen(h:at(lam), { vectors = false }), ls.eigen(H0 + lam * V, { vectors = false })
      errs[s] = math.max(math.abs(Eeff[1] - Eall[2]), math.abs(Eeff[2] - Eall[3]))
    end
    assert.is_true(errs[1] / errs[2] > 10 and errs[1] / errs[2] < 24)
  end)

  it("works in H0's eigenbasis when H0 is not diagonal", function()
    -- source: common practice (spectra are basis independent)
    local t, U = 1.0, 20.0
    local H0, V = hubbard(t, U)
    local c, s = math.cos(0.3), math.sin(0.3)
    local R = ls.matrix{ { c, 0, -s, 0 }, { 0, 1, 0, 0 }, { s, 0, c, 0 }, { 0, 0, 0, 1 } }
    local h = ls.effective(R * H0 * R:adj(), R * V * R:adj(), { levels = { 1, 2 }, order = 4 })
    local E = low(h:at(1), 2)
    assert.near(-4 * t ^ 2 / U + 16 * t ^ 4 / U ^ 3, E[1], 1e-13)
    assert.near(0, E[2], 1e-13)
  end)

  it("prints a labelled matrix and warns when the gap is small", function()
    -- source: common practice
    local H0, V = hubbard(1, 20)
    local text = tostring(ls.effective(H0, V, { levels = { 1, 2 }, order = 2 }))
    assert.is_truthy(text:find("levelshift.effective: 2 levels, order 2", 1, true))
    assert.is_truthy(text:find("order 2 (coefficient of lambda^2):", 1, true))
    assert.is_truthy(text:find("\n  level 1 ", 1, true)) -- rows named by level without a basis
    local h = ls.effective(ls.matrix{ { 0, 0 }, { 0, 0.1 } }, ls.matrix{ { 0, 0.5 }, { 0.5, 0 } }, { levels = { 1 } })
    local w = h:warnings()
    assert.are.equal(1, #w)
    assert.is_truthy(w[1]:find("gap 0.1 between the group and the other levels", 1, true))
    assert.is_truthy(tostring(h):find("warning: the gap", 1, true))
    assert.are.equal(2, h:order()) -- default order
  end)

  it("chooses the group by labels and labels the printout with the basis states", function()
    -- source: Blais et al., Phys. Rev. A 69, 062320 (2004): the dispersive shift g^2/Delta of
    -- |up, 0> for the Jaynes-Cummings model, Delta = w_q - w_r
    local wq, wr, g = 1.0, 1.5, 0.01
    local P = ls.product(ls.spin(0.5), ls.oscillator(6))
    local q, r = P:site(1), P:site(2)
    local H0 = wq * q.Sz + wr * r.number
    local V = g * (q.Sp * r.lower + q.Sm * r.raise)
    local h = ls.effective(H0, V, { basis = P, labels = { { m1 = 0.5, n2 = 0 }, { m1 = -0.5, n2 = 0 } }, order = 2 })
    assert.are.same({ 1, 2 }, h:group()) -- |dn,0> (-0.5) and |up,0> (0.5), in ascending energy
    assert.are.same({ "m1=-1/2 n2=0", "m1=1/2 n2=0" }, h:labels())
    assert.near(0.5 + g * g / (wq - wr), re(h:at(1), 2, 2), 1e-14)
    local text = tostring(h)
    assert.is_truthy(text:find("\n  m1=1/2 n2=0 ", 1, true), text)
    assert.is_truthy(text:find("m1=-1/2 n2=0  m1=1/2 n2=0", 1, true), text) -- column heads
    -- a window with the basis: labels of the states found
    local hw = ls.effective(H0, V, { basis = P, window = { 0.9, 2.1 }, order = 2 })
    assert.are.same({ "m1=-1/2 n2=1", "m1=1/2 n2=1" }, hw:labels())
    -- without a basis, or with H0 not diagonal in it: "level k"
    assert.are.same({ "level 3", "level 4" }, ls.effective(H0, V, { window = { 0.9, 2.1 } }):labels())
    local B = ls.basis { "g", "e" }
    local H0r = ls.matrix { { 0, 0.1 }, { 0.1, 1 } }
    local hr = ls.effective(H0r, ls.matrix { { 0, 0.2 }, { 0.2, 0 } }, { basis = B, levels = { 1 } })
    assert.are.same({ "level 1" }, hr:labels())
    local hn = ls.effective(ls.matrix { { 0, 0 }, { 0, 1 } }, ls.matrix { { 0, 0.2 }, { 0.2, 0 } }, { basis = B, labels = { "e" } })
    assert.are.same({ 2 }, hn:group())
    assert.are.same({ "e" }, hn:labels())
    -- errors of the label choice
    assert.error_matches(function() ls.effective(H0, V, { labels = { { m1 = 0.5, n2 = 0 } } }) end,
      "bad argument #3 to 'effective' ('labels' needs 'basis' = the basis H0 is written in)", 1, true)
    assert.error_matches(function() ls.effective(H0, V, { basis = P, labels = { { m1 = 0.5, n2 = 9 } } }) end,
      "bad argument #3 to 'effective' ('labels'[1] matches no state of the basis)", 1, true)
    assert.error_matches(function() ls.effective(H0, V, { basis = P, labels = { { m1 = 0.5, n2 = 0 } }, levels = { 1 } }) end,
      "give one of 'levels', 'window' or 'labels'", 1, true)
    assert.error_matches(function() ls.effective(H0r, ls.zeros(2, 2), { basis = B, labels = { "g" } }) end,
      "bad argument #3 to 'effective' ('labels' needs H0 diagonal in 'basis': H0 is not diagonal in its basis", 1, true)
    assert.error_matches(function() ls.effective(H0, V, { basis = B, levels = { 1 } }) end,
      "bad argument #3 to 'effective' ('basis' has 2 states but H0 is 12x12)", 1, true)
    assert.error_matches(function() ls.effective(H0, V, { basis = 3, levels = { 1 } }) end,
      "bad argument #3 to 'effective' ('basis' must be a basis)", 1, true)
  end)

  describe("errors", function()
    local H0, V = hubbard(1, 20)
    it("an empty group", function()
      assert.error_matches(function() ls.effective(H0, V, { levels = {} }) end, "the group of levels is empty", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { window = { 5, 6 } }) end,
        "the group of levels is empty: no level of H0 in the window", 1, true)
    end)
    it("levels out of range, repeated, or no group given", function()
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1, 5 } }) end, "level 5 is out of range 1..4", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { levels = { 0 } }) end, "level 0 is out of range 1..4", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1, 2, 1 } }) end, "level 1 is given twice", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { order = 2 }) end, "give the group as 'levels'", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1 }, lvls = 2 }) end, "unknown option 'lvls'", 1, true)
    end)
    it("a group that cuts through a degenerate set says which levels must come along", function()
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1 } }) end,
        "the group cuts through a degenerate level of H0 (E = 0): level 2 must come along with level 1", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1, 2, 3 } }) end, "level 4 must come along with level 3", 1, true)
    end)
    it("V of the wrong size, non-Hermitian V or H0", function()
      assert.error_matches(function() ls.effective(H0, ls.zeros(3, 3), { levels = { 1, 2 } }) end,
        "bad argument #2 to 'effective' (V must be 4x4 like H0, got 3x3)", 1, true)
      assert.error_matches(function() ls.effective(H0, V:copy():set(1, 3, 0), { levels = { 1, 2 } }) end,
        "bad argument #2 to 'effective' (V is not Hermitian: |H(1,3) - conj(H(3,1))| = 1", 1, true)
      assert.error_matches(function() ls.effective(ls.matrix{ { 0, 1 }, { 0, 1 } }, ls.zeros(2, 2), { levels = { 1 } }) end,
        "bad argument #1 to 'effective' (H0 is not Hermitian", 1, true)
    end)
    it("order below 1 or above 50, and a term beyond the order", function()
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1, 2 }, order = 0 }) end, "order must be from 1 to 50, got 0", 1, true)
      assert.error_matches(function() ls.effective(H0, V, { levels = { 1, 2 }, order = 51 }) end, "order must be from 1 to 50, got 51", 1, true)
      local h = ls.effective(H0, V, { levels = { 1, 2 }, order = 3 })
      assert.error_matches(function() h:term(4) end, "order 4 is out of range 0..3", 1, true)
    end)
  end)

  -- A diagonal H0 takes the sparse path (Omega on the states V reaches);
  -- the 40,000-state models below could not be run densely (n^2 complex
  -- working arrays of 77 GB are refused by the dense cap).
  describe("on the sparse path", function()
    -- qubit x oscillator, H0 = wq Sz + wr a^+a, Jaynes-Cummings coupling;
    -- invented parameters
    local function jc(N, wq, wr, g)
      local P = ls.product(ls.spin(0.5), ls.oscillator(N))
      local q, r = P:site(1), P:site(2)
      return P, wq * q.Sz + wr * r.number, g * (q.Sp * r.lower + q.Sm * r.raise)
    end

    it("gives the dispersive shift chi = g^2/Delta and the exact Jaynes-Cummings doublets", function()
      local wq, wr, g, n = 1.3, 1.0, 0.02, 3
      local P, H0, V = jc(20000, wq, wr, g)
      local D = wq - wr
      local h = ls.effective(H0, V, { basis = P, labels = { { m1 = -0.5, n2 = n }, { m1 = 0.5, n2 = n } }, order = 6 })
      assert.are.same({ "m1=-1/2 n2=3", "m1=1/2 n2=3" }, h:labels())
      -- source: Blais et al., Phys. Rev. A 69, 062320 (2004), Sec. III, the
      -- dispersive form H = (wr + chi sz) a^+a + (wq + chi) sz/2 with
      -- chi = g^2/Delta, Delta = wq - wr (equation number not checked): the
      -- second-order shifts of |g,n> and |e,n> are -n chi and (n + 1) chi
      local chi = g * g / D
      local H2 = h:term(2)
      assert.near(-n * chi, re(H2, 1, 1), 1e-17)
      assert.near((n + 1) * chi, re(H2, 2, 2), 1e-17)
      assert.near(0, re(H2, 1, 2), 1e-18)
      -- qubit line of the n-photon doublet: wq + (2n + 1) chi at second order
      local H = h:at(1, 2)
      assert.near(wq + (2 * n + 1) * chi, re(H, 2, 2) - re(H, 1, 1), 1e-14)
      -- source: Jaynes & Cummings, Proc. IEEE 51, 89 (1963) (from memory): in
      -- the doublet {|e,m>, |g,m+1>} the levels are (m + 1/2) wr +-
      -- sqrt(Delta^2/4 + g^2 (m + 1)); |e,3> is the upper branch of m = 3,
      -- |g,3> the lower of m = 2. Order 6 leaves O(g^8) ~ 1e-7 here, order 4
      -- would miss the g^6 term (3.4e-6).
      local Ee = (n + 0.5) * wr + math.sqrt(D * D / 4 + g * g * (n + 1))
      local Eg = (n - 0.5) * wr - math.sqrt(D * D / 4 + g * g * n)
      local H6 = h:at(1)
      assert.near(Eg, re(H6, 1, 1), 2e-7)
      assert.near(Ee, re(H6, 2, 2), 2e-7)
      assert.is_true(math.abs(Ee - re(h:at(1, 4), 2, 2)) > 1e-6, "order 4 must be visibly worse")
      -- the same |g,3> chosen by a window (the spectrum of a diagonal H0 is
      -- sorted, not diagonalized): E = 3 wr - wq/2 = 2.35
      local hw = ls.effective(H0, V, { basis = P, window = { 2.3, 2.4 }, order = 6 })
      assert.are.same({ "m1=-1/2 n2=3" }, hw:labels())
      assert.near(Eg, re(hw:at(1), 1, 1), 2e-7)
    end)

    it("has eigenvalue errors falling like lambda^(K+1) against exact diagonalization", function()
      -- source: common practice (order-K truncation error), as in
      -- ../shared/METHODS.md section 2; a Rabi coupling g sx (a + a^+) has
      -- only even orders, so odd K shows the ratio 2^(K+1)
      local P = ls.product(ls.spin(0.5), ls.oscillator(40))
      local q, r = P:site(1), P:site(2)
      local H0 = 0.6 * q.Sz + 1.0 * r.number
      local V = 0.3 * (2 * q.Sx) * (r.lower + r.raise)
      for _, K in ipairs{ 3, 5 } do
        local h = ls.effective(H0, V, { levels = { 1, 2 }, order = K })
        local errs = {}
        for s, lam in ipairs{ 0.1, 0.05 } do
          local Eeff, Eex = low(h:at(lam), 2), low(H0 + lam * V, 2)
          errs[s] = math.max(math.abs(Eeff[1] - Eex[1]), math.abs(Eeff[2] - Eex[2]))
        end
        local ratio = errs[1] / errs[2]
        assert.is_true(ratio > 0.75 * 2 ^ (K + 1) and ratio < 1.3 * 2 ^ (K + 1),
          ("K = %d: ratio %.3g, want ~%d"):format(K, ratio, 2 ^ (K + 1)))
      end
    end)

    it("names the levels a cut through a degenerate level leaves out", function()
      -- resonant qubit: |e,2> and |g,3> share E = 2.5 (levels 6 and 7, ties
      -- in basis order, the qubit's up state first)
      local P, H0, V = jc(20000, 1.0, 1.0, 0.01)
      assert.error_matches(function() ls.effective(H0, V, { basis = P, labels = { { m1 = -0.5, n2 = 3 } } }) end,
        "bad argument #3 to 'effective' (the group cuts through a degenerate level of H0 (E = 2.5): level 6 must "
          .. "come along with level 7)", 1, true)
      local h = ls.effective(H0, V, { levels = { 6, 7 }, order = 2 })
      assert.are.same({ 6, 7 }, h:group())
    end)
  end)

  describe("on the Krylov path (large sparse H0, not diagonal)", function()
    -- a tilted qubit H_q = eps sigma_z + delta sigma_x (invented values)
    -- beside an oscillator, V = g sigma_x (a + a^+). Rotated into the
    -- qubit's eigenbasis by the angle theta (tan theta = delta/eps) the same
    -- model is H_q' = r sigma_z (r = sqrt(eps^2 + delta^2)) and sigma_x' =
    -- cos theta sigma_x - sin theta sigma_z (a rotation about y; common
    -- practice), whose H0 is diagonal: the two effective Hamiltonians must
    -- have the same eigenvalues at every lambda (unitary equivalence).
    local eps, delta, g, N = 0.37, 0.11, 0.05, 3000
    local P = ls.product(ls.spin(0.5), ls.oscillator(N))
    local q, o = P:site(1), P:site(2)
    local sx, sz = 2 * q.Sx, 2 * q.Sz
    local x = o.lower + o.raise
    it("agrees with the same model in the diagonal basis", function()
      local H0 = 1.0 * o.number + eps * sz + delta * sx
      local V = g * sx * x
      local h = ls.effective(H0, V, { levels = { 1, 2, 3 }, order = 5 })
      local r, th = math.sqrt(eps ^ 2 + delta ^ 2), math.atan(delta, eps)
      local H0d = 1.0 * o.number + r * sz
      local Vd = g * (math.cos(th) * sx - math.sin(th) * sz) * x
      local hd = ls.effective(H0d, Vd, { levels = { 1, 2, 3 }, order = 5 })
      for _, lam in ipairs { 0.4, 1 } do
        local a = ls.eigen(h:at(lam), { vectors = false })
        local b = ls.eigen(hd:at(lam), { vectors = false })
        for k = 1, 3 do assert.near(b[k], a[k], 1e-12) end
      end
      -- zeroth order: the qubit-split levels -r, r, 1 - r (common practice)
      local t0 = h:term(0)
      assert.near(-r, (t0:get(1, 1)), 1e-12)
      assert.near(r, (t0:get(2, 2)), 1e-12)
      assert.near(1 - r, (t0:get(3, 3)), 1e-12)
    end)

    it("refuses a group that cuts through a degenerate level", function()
      -- resonant qubit (2 r = omega): |e,0> and |g,1> share E = 0.5
      local H0 = 1.0 * o.number + 0.4 * sz + 0.3 * sx
      assert.error_matches(function() ls.effective(H0, g * sx * x, { levels = { 1, 2 }, order = 2 }) end,
        "the group cuts through a degenerate level of H0", 1, true)
    end)
  end)
  -- the gap rule (coupling below a quarter of the gap; common practice)
  -- judged at the lambda h:at is evaluated at
  it("warns from h:at at a lambda where the coupling is not small", function()
    local h = ls.effective(ls.matrix { { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 1 } },
      ls.matrix { { 0, 0, 1 }, { 0, 0, 1 }, { 1, 1, 0 } }, { levels = { 1, 2 }, order = 4 })
    local m, w = h:at(0.1)
    assert.is_nil(w)
    -- two-level closed form of the group's effective coupling at second
    -- order: -lambda^2 |V|^2 / gap on every entry (common practice)
    assert.near(-0.01, m:get(1, 2), 1e-3)
    local _, w2 = h:at(0.5)
    assert.truthy(w2 and w2:find("is not small against the gap 1.0 between the group and the other levels (ratio 0.5)",
      1, true), w2)
  end)
end)
