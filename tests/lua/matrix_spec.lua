-- Matrices (ops): arithmetic, access, errors.
local ls = require "levelshift"

describe("matrix", function()
  it("builds from a literal and reads back", function()
    local m = ls.matrix{{1.3, 0.4}, {0.4, -0.7}}
    local r, c = m:dim()
    assert.are.equal(2, r); assert.are.equal(2, c)
    local re, im = m:get(1, 2)
    assert.are.equal(0.4, re); assert.are.equal(0, im)
  end)

  it("does + - * ^ with ops and scalars; number + op is number*I + op", function()
    local a = ls.matrix{{2.385, 0.5}, {0.5, -1.25}}
    local b = 1.5 + a
    assert.near(3.885, (b:get(1, 1)), 1e-14)
    assert.near(0.5, (b:get(1, 2)), 1e-14)
    local c = a * a - a ^ 2
    for i = 1, 2 do for j = 1, 2 do assert.near(0, (c:get(i, j)), 1e-14) end end
    local d = 2 - a
    assert.near(-0.385, (d:get(1, 1)), 1e-14)
    assert.near(-0.5, (d:get(1, 2)), 1e-14)
    local e = a / 2
    assert.near(1.1925, (e:get(1, 1)), 1e-14)
    local id = a ^ 0
    assert.near(1, (id:get(2, 2)), 0)
  end)

  it("handles complex entries and the adjoint", function()
    local h = ls.matrix{{1, 2 + 3 * ls.I}, {2 - 3 * ls.I, -1}}
    assert.is_true(h:is_complex())
    assert.is_true((h:is_hermitian(1e-14)))
    local re, im = h:adj():get(1, 2)
    assert.are.equal(2, re); assert.are.equal(3, im)
    local z = ls.I * ls.I
    assert.are.equal(-1, z.re)
  end)

  it("checks a padded 50000-state x for Hermiticity on its stored entries", function()
    local x = ls.oscillator(50000).x
    local ok, d = x:is_hermitian(0)
    assert.is_true(ok); assert.are.equal(0, d)
    -- <0|x|1> = 1/sqrt(2) (common practice, x = (a + a^+)/sqrt 2): spoil
    -- its partner by 0.375 and add an unpaired 0.25 far off the band
    x:set(2, 1, 1 / math.sqrt(2) + 0.375)
    x:set(7, 40000, 0.25)
    ok, d = x:is_hermitian()
    assert.is_false(ok); assert.near(0.375, d, 1e-15)
  end)

  it("sets elements and grows complex on demand", function()
    local m = ls.zeros(3)
    m:set(2, 3, 1.25, -0.5)
    local re, im = m:get(2, 3)
    assert.are.equal(1.25, re); assert.are.equal(-0.5, im)
  end)

  it("prints small matrices readably", function()
    local s = tostring(ls.matrix{{1, 0}, {0, 2}})
    assert.truthy(s:find("2x2 real", 1, true))
    assert.truthy(s:find("\n", 1, true))
  end)

  it("survives double close and refuses a closed matrix", function()
    local m = ls.matrix{{1}}
    m:close(); m:close()
    assert.error_matches(function() m:get(1, 1) end, "closed matrix", 1, true)
    do local h <close> = ls.matrix{{1}} end
  end)

  describe("errors", function()
    local a = ls.matrix{{1, 2}, {2, 1}}
    local b = ls.matrix{{1, 2, 3}, {2, 1, 0}, {3, 0, 1}}
    it("size mismatch in arithmetic", function()
      assert.error_matches(function() return a + b end, "add: dimension mismatch: 2x2 vs 3x3", 1, true)
      assert.error_matches(function() return a * b end, "mul: dimension mismatch in product", 1, true)
    end)
    it("wrong types", function()
      assert.error_matches(function() return a + "x" end, "bad argument #2", 1, true)
      assert.error_matches(function() return a:get("a", 1) end, "bad argument #1 to 'get' (row index must be an integer)", 1, true)
      assert.error_matches(function() ls.matrix(3) end, "bad argument #1 to 'matrix' (table expected", 1, true)
    end)
    it("index out of range", function()
      assert.error_matches(function() a:get(3, 1) end, "row index 3 out of range 1..2", 1, true)
      assert.error_matches(function() a:set(1, 0, 1) end, "column index 0 out of range", 1, true)
    end)
    it("NaN and inf entries", function()
      assert.error_matches(function() ls.matrix{{0 / 0}} end, "entry (1, 1) is NaN or infinite", 1, true)
      assert.error_matches(function() a:set(1, 1, math.huge) end, "NaN or infinite", 1, true)
      assert.error_matches(function() return a * (0 / 0) end, "NaN or infinite", 1, true)
    end)
    it("ragged and empty literals", function()
      assert.error_matches(function() ls.matrix{{1, 2}, {3}} end, "row 2 has 1 entries, expected 2", 1, true)
      assert.error_matches(function() ls.matrix{} end, "at least one row", 1, true)
    end)
    it("zero or negative sizes and bad powers", function()
      assert.error_matches(function() ls.zeros(0) end, "size must be positive", 1, true)
      assert.error_matches(function() ls.zeros(-3) end, "size must be positive", 1, true)
      assert.error_matches(function() return a ^ -1 end, "power must be non-negative", 1, true)
      assert.error_matches(function() return a ^ 1.5 end, "power must be an integer", 1, true)
    end)
  end)
end)
