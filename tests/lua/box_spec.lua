-- Particle in a box (ls.box): closed-form operators, potentials by
-- quadrature, second-order shift in a uniform field, bad input.
local ls = require "levelshift"

local pi = math.pi
local function rel(a, b) return math.abs(a - b) / math.max(math.abs(b), 1e-300) end

-- independent Lua check: (2/L) int_0^L f(u) sin(m pi u/L) sin(n pi u/L) du by
-- composite Simpson on 4000 panels (common practice), u measured from the left wall
local function simpson_element(L, m, n, f)
  local K = 4000
  local h = L / K
  local acc = 0
  for k = 0, K do
    local u = k * h
    local w = (k == 0 or k == K) and 1 or (k % 2 == 1 and 4 or 2)
    acc = acc + w * f(u) * math.sin(m * pi * u / L) * math.sin(n * pi * u / L)
  end
  return 2 / L * acc * h / 3
end

describe("ls.box", function()
  local L, mass = 1.37, 0.83

  it("has labels n = 1..N and H0 = n^2 pi^2/(2 m L^2)", function()
    local B = ls.box(7, { width = L, mass = mass })
    assert.are.equal(7, B:dim())
    assert.are.equal("box", B:kind())
    assert.are.equal(1, B:labels(1).n)
    assert.are.equal(7, B:labels(7).n)
    -- source: Griffiths, Introduction to Quantum Mechanics, 2nd ed. 2005, eq. 2.27
    for n = 1, 7 do
      assert.is_true(rel(B.H0:get(n, n), n * n * pi * pi / (2 * mass * L * L)) < 1e-14)
    end
    assert.are.equal(0, (B.H0:get(1, 2)))
  end)

  it("x and x^2: closed forms, and the same integrals done in Lua", function()
    local N = 9
    local B = ls.box(N, { width = L })
    local x, x2 = B.x, B.x2
    for m = 1, N do
      for n = 1, N do
        local want
        -- diagonal: Griffiths 2005, problem 2.4: <x> = a/2, <x^2> = a^2 (1/3 - 1/(2 (n pi)^2))
        -- off-diagonal: elementary integration of x sin sin (common practice), recomputed
        -- here by Simpson's rule
        if m == n then
          want = L / 2
        elseif (m + n) % 2 == 1 then
          want = -8 * L * m * n / (pi * pi * (m * m - n * n) ^ 2)
        else
          want = 0
        end
        assert.is_true(math.abs(x:get(m, n) - want) < 1e-14 * L, "x " .. m .. "," .. n)
        local want2
        if m == n then
          want2 = L * L * (1 / 3 - 1 / (2 * (n * pi) ^ 2))
        else
          want2 = (-1) ^ (m + n) * 8 * L * L * m * n / (pi * pi * (m * m - n * n) ^ 2)
        end
        assert.is_true(math.abs(x2:get(m, n) - want2) < 1e-14 * L * L, "x2 " .. m .. "," .. n)
      end
    end
    for _, mn in ipairs { { 1, 2 }, { 3, 3 }, { 2, 7 } } do
      local m, n = mn[1], mn[2]
      assert.is_true(math.abs(x:get(m, n) - simpson_element(L, m, n, function(u) return u end)) < 1e-11)
      assert.is_true(math.abs(x2:get(m, n) - simpson_element(L, m, n, function(u) return u * u end)) < 1e-11)
    end
  end)

  it("p: closed form, Hermitian, and p = i m [H0, x]", function()
    local N = 8
    local B = ls.box(N, { width = L, mass = mass })
    local p, x, H0 = B.p, B.x, B.H0
    assert.is_true(p:is_complex())
    for m = 1, N do
      for n = 1, N do
        -- <m|p|n> = -i hbar d/dx elements: -4 i m n/(L (m^2 - n^2)) for m + n odd
        -- (elementary integration, common practice)
        local re, im = p:get(m, n)
        local want = (m + n) % 2 == 1 and -4 * m * n / (L * (m * m - n * n)) or 0
        assert.are.equal(0, re)
        assert.is_true(math.abs(im - want) < 1e-14 * (1 + math.abs(want)))
        -- Heisenberg: p = i m [H0, x] (common practice); exact element by element since H0 is diagonal
        local c = mass * (H0:get(m, m) - H0:get(n, n)) * x:get(m, n)
        assert.is_true(math.abs(im - c) < 1e-12 * (1 + math.abs(c)))
      end
    end
    -- p^2 = 2 m H0 (common practice)
    local d = B.p2 - 2 * mass * H0
    for n = 1, N do assert.is_true(math.abs(d:get(n, n)) < 1e-12) end
  end)

  it("centered box shifts x by -L/2 and calls f on [-L/2, L/2]", function()
    local B = ls.box(6, { width = L, centered = true })
    assert.is_true(math.abs(B.x:get(1, 1)) < 1e-15)
    assert.is_true(rel(B.x:get(1, 2), ls.box(6, { width = L }).x:get(1, 2)) < 1e-15)
    local lo, hi = math.huge, -math.huge
    B:potential(function(x)
      lo, hi = math.min(lo, x), math.max(hi, x)
      return x
    end)
    assert.is_true(lo > -L / 2 and lo < -L / 2 + 1e-2 and hi < L / 2 and hi > L / 2 - 1e-2)
    -- x^2 about the centre: <n|x^2|n> = L^2 (1/12 - 1/(2 n^2 pi^2)) (from Griffiths 2005 problem 2.4,
    -- shifted by L/2)
    assert.is_true(rel(B.x2:get(3, 3), L * L * (1 / 12 - 1 / (2 * 9 * pi * pi))) < 1e-13)
  end)

  it("potential(f) of a polynomial equals the closed forms", function()
    local N = 12
    local B = ls.box(N, { width = L })
    local a, b, c = 0.417, -1.29, 2.083
    local V, err = B:potential(function(x) return a + b * x + c * x * x end)
    local ref = a * B:identity() + b * B.x + c * B.x2
    local worst = 0
    for m = 1, N do
      for n = 1, N do worst = math.max(worst, math.abs(V:get(m, n) - ref:get(m, n))) end
    end
    assert.is_true(worst < 1e-12, "worst " .. worst)
    assert.is_true(err < 1e-10)
    assert.is_true(V:is_hermitian())
  end)

  it("a narrow Gaussian bump is resolved", function()
    -- V = exp(-(x - c)^2/w^2) far from the walls: c_k = (1/L) sqrt(pi) w exp(-(k pi w/(2L))^2) cos(k pi c/L)
    -- (Fourier transform of a Gaussian, common practice; the tails beyond the walls are below e^-400)
    -- and V_mn = c_|m-n| - c_(m+n)
    local N, c, w = 6, 0.6 * L, 0.02 * L
    local B = ls.box(N, { width = L })
    local V = B:potential(function(x) return math.exp(-((x - c) / w) ^ 2) end)
    local function ck(k) return math.sqrt(pi) * w / L * math.exp(-(k * pi * w / (2 * L)) ^ 2) * math.cos(k * pi * c / L) end
    for m = 1, N do
      for n = 1, N do
        assert.is_true(math.abs(V:get(m, n) - (ck(math.abs(m - n)) - ck(m + n))) < 1e-13, m .. "," .. n)
      end
    end
  end)

  it("a step with its break point matches the closed form", function()
    -- V = V0 for x < s: V_mn = V0/pi [sin((m-n) pi s/L)/(m-n) - sin((m+n) pi s/L)/(m+n)],
    -- V_nn = V0 [s/L - sin(2 n pi s/L)/(2 n pi)] (elementary integration, common practice)
    local N, V0, s = 10, 3.7, 0.523
    local B = ls.box(N, { width = L })
    local V = B:potential(function(x) return x < s and V0 or 0 end, { breaks = { s } })
    for m = 1, N do
      for n = 1, N do
        local want
        if m == n then
          want = V0 * (s / L - math.sin(2 * n * pi * s / L) / (2 * n * pi))
        else
          want = V0 / pi * (math.sin((m - n) * pi * s / L) / (m - n) - math.sin((m + n) * pi * s / L) / (m + n))
        end
        assert.is_true(math.abs(V:get(m, n) - want) < 1e-12, m .. "," .. n)
      end
    end
    -- without the break point the grid never converges to 1e-12: nil plus a message naming breaks
    local bad, msg = ls.box(3, { width = L }):potential(function(x) return x < s and V0 or 0 end)
    assert.is_nil(bad)
    assert.is_truthy(msg:find("breaks", 1, true))
  end)

  it("ground state in a uniform field: E2 = -(15 - pi^2) m F^2 L^4/(24 pi^4)", function()
    -- Reference: closed form of the second-order sum
    --   E2 = -(128 m L^4/pi^6) sum_{n even} n^2/(n^2 - 1)^5 = -(15 - pi^2) m L^4/(24 pi^4)   (F = 1, hbar = 1)
    -- derived here from <n|x|1> above and E_1 - E_n; the sum identity
    -- sum_{n even} n^2/(n^2-1)^5 = pi^2 (15 - pi^2)/3072 was checked to 30 digits
    -- with mpmath (the Dalgarno-Lewis method, Dalgarno & Lewis, Proc. R. Soc. A 233, 70 (1955),
    -- gives the same closed form in one integral).
    local E2 = -(15 - pi * pi) * mass * L ^ 4 / (24 * pi ^ 4)
    local B = ls.box(60, { width = L, mass = mass })
    local s = ls.perturb(B.H0, B.x, { order = 3, levels = { 1 } })
    assert.is_true(rel(s:energy(1, 1), L / 2) < 1e-14)
    assert.is_true(rel(s:energy(1, 2), E2) < 1e-10, s:energy(1, 2) .. " vs " .. E2)
    assert.is_true(math.abs(s:energy(1, 3)) < 1e-10 * math.abs(E2) * L) -- odd in the centred field
    -- the same from dense diagonalization at a weak field: (E(F) - E1 - F L/2)/F^2 -> E2 + O(F^2)
    for _, F in ipairs { 0.02, 0.01 } do
      local E = ls.eigen(B.H0 + F * B.x, { count = 1 })
      local got = (E[1] - B.H0:get(1, 1) - F * L / 2) / (F * F)
      assert.is_true(rel(got, E2) < 40 * F * F, "F = " .. F .. ": " .. got)
    end
  end)

  it("a box site in a product basis keeps its operators", function()
    local P = ls.product(ls.box(4, { width = L }), ls.spin(0.5))
    local xs = P:site(1).x
    assert.are.equal(8, (xs:dim()))
    assert.is_true(rel(xs:get(1, 3), ls.box(4, { width = L }).x:get(1, 2)) < 1e-15)
  end)

  it("recipes box_field and box_step", function()
    -- box_field: E2 of the ground state against the closed form above (same source)
    local m = ls.recipe("box_field", { F = 0.37, width = 1.21, mass = 0.9 })
    local s = ls.perturb(m.H0, m.V, { order = 2, levels = { 1 } })
    assert.is_true(rel(s:energy(1, 2), -(15 - pi * pi) * 0.9 * 0.37 ^ 2 * 1.21 ^ 4 / (24 * pi ^ 4)) < 1e-10)
    assert.is_true(math.abs(s:energy(1, 1)) < 1e-15) -- centred box: no first order
    -- box_step: first order equals the closed form V0 [s/L - sin(2 n pi s/L)/(2 n pi)] (elementary)
    local st = ls.recipe("box_step", { V0 = -2.3, edge = 0.41, states = 12 })
    for n = 1, 12 do
      assert.is_true(math.abs(st.V:get(n, n) - (-2.3) * (0.41 - math.sin(2 * n * pi * 0.41) / (2 * n * pi))) < 1e-12)
      assert.is_true(math.abs(st.V:get(n, n) - st.first_order(n)) < 1e-12)
    end
    assert.error_matches(function() ls.recipe("box_step", { edge = 1.5 }) end, "parameter 'edge' %(1.5%) must be inside the box")
    assert.error_matches(function() ls.recipe("box_field", { mass = -1 }) end, "parameter 'mass' must be positive")
  end)

  it("rejects bad input with clear messages", function()
    assert.error_matches(function() ls.box(0) end, "bad argument #1 to '.-box' %(number of states N must be at least 1%)")
    assert.error_matches(function() ls.box(2.5) end, "N must be an integer")
    assert.error_matches(function() ls.box("x") end, "bad argument #1 to '.-box' %(integer N >= 1 expected")
    assert.error_matches(function() ls.box(3, { width = -1 }) end, "width must be positive and finite, got %-1")
    assert.error_matches(function() ls.box(3, { mass = 0 }) end, "mass must be positive and finite, got 0")
    assert.error_matches(function() ls.box(3, { mass = 0 / 0 }) end, "mass must be positive")
    assert.error_matches(function() ls.box(3, { widht = 1 }) end, "unknown option 'widht' %(accepted: width mass centered%)")
    assert.error_matches(function() ls.box(3, { centered = 1 }) end, "'centered' must be a boolean")
    local B = ls.box(3)
    assert.error_matches(function() B:potential(42) end, "bad argument #1 to 'potential' %(function expected")
    assert.error_matches(function() B:potential(function() return 0 / 0 end) end,
      "potential: the function returned NaN at x = ")
    assert.error_matches(function() B:potential(function() return math.huge end) end,
      "potential: the function returned inf at x = ")
    assert.error_matches(function() B:potential(function() return "1" end) end,
      "potential: the function returned a string at x = .- %(number expected%)")
    assert.error_matches(function() B:potential(function() error("boom") end) end,
      "potential: the function failed at x = .-boom")
    assert.error_matches(function() B:potential(function() return 0 end, { breaks = { 1.5 } }) end,
      "break point 1 %(x = 1.5%) is not inside the box")
    assert.error_matches(function() B:potential(function() return 0 end, { tol = -1 }) end, "'tol' must be in")
    assert.error_matches(function() ls.oscillator(3):potential(function() return 0 end) end,
      "potential: the basis is not a box")
    assert.error_matches(function() return B.nope end, "box has no operator 'nope' %(it has H0, x, p, x2, p2, identity%)")
    -- the basis survives a failed call
    assert.are.equal(3, B:dim())
  end)
end)
