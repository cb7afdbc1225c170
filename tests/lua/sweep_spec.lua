-- Sweeps of a coupling or a field: H(p) = H0 + p V, levels tracked by overlap.
local ls = require "levelshift"

local function two_level(g)
  -- H(p) = [[p, g], [g, -p]] = H0 + p V with H0 = [[0, g], [g, 0]], V = diag(1, -1)
  return ls.matrix{{0, g}, {g, 0}}, ls.matrix{{1, 0}, {0, -1}}
end

local function tmpname(suffix)
  return os.tmpname() .. suffix
end

describe("sweep", function()
  it("follows a two-level avoided crossing on +-sqrt(p^2 + g^2)", function()
    -- source: closed form of the 2x2 symmetric eigenproblem, E = +-sqrt(p^2 + g^2) (common practice)
    local g = 0.1
    local H0, V = two_level(g)
    local sw = ls.sweep{H0 = H0, V = V, from = -1, to = 1, steps = 200}
    local p, lo, hi = sw.p, sw:level(1), sw:level(2)
    assert.are.equal(201, #p)
    assert.are.equal(-1, p[1]); assert.are.equal(1, p[201])
    for k = 1, #p do
      local e = math.sqrt(p[k] ^ 2 + g ^ 2)
      assert.near(-e, lo[k], 1e-13)
      assert.near(e, hi[k], 1e-13)
    end
    -- minimum gap 2g at p = 0 (common practice: gap 2|V12| at resonance)
    local c = sw:crossings()
    assert.are.equal(1, #c)
    assert.are.equal("avoided", c[1].kind)
    assert.near(0, c[1].at, 1e-6)
    assert.near(2 * g, c[1].gap, 1e-12)
    assert.are.same({1, 2}, c[1].levels)
    assert.is_true(sw.min_overlap > 0.9)
  end)

  it("finds the minimum gap between grid points", function()
    -- same closed form, shifted resonance p0 = 0.0123: H = [[p - p0, g], [g, p0 - p]] (common practice)
    local g, p0 = 0.05, 0.0123
    local H0 = ls.matrix{{-p0, g}, {g, p0}}
    local sw = ls.sweep{H0 = H0, V = ls.matrix{{1, 0}, {0, -1}}, from = -1, to = 1, steps = 40}
    local c = sw:crossings()
    assert.are.equal(1, #c)
    assert.near(p0, c[1].at, 1e-6)
    assert.near(2 * g, c[1].gap, 1e-12)
  end)

  it("follows uncoupled levels straight through a true crossing, with a grid point at p = 0", function()
    -- diag(p, -p): the levels p and -p cross at p = 0 with no coupling (common practice)
    local sw = ls.sweep{H0 = ls.matrix{{0, 0}, {0, 0}}, V = ls.matrix{{1, 0}, {0, -1}},
                        from = -1, to = 1, steps = 20}
    local p, a, b = sw.p, sw:level(1), sw:level(2)
    assert.are.equal(0, p[11]) -- the grid point exactly at the crossing
    for k = 1, #p do
      assert.near(p[k], a[k], 1e-14) -- level 1 (lowest at from = -1) is E = p all the way
      assert.near(-p[k], b[k], 1e-14)
    end
    local c = sw:crossings()
    assert.are.equal(1, #c)
    assert.are.equal("crossing", c[1].kind)
    assert.near(0, c[1].at, 1e-12)
    assert.near(0, c[1].gap, 1e-12)
    assert.are.same({1, 2}, c[1].levels)
  end)

  it("follows a true crossing between grid points and in a larger model", function()
    -- H0 = diag(0, 1, 2.5), V = diag(1, 0, -1): level 1 (E = p) crosses E = 1 at p = 1 and
    -- E = 2.5 - p at p = 1.25; level 3 crosses level 2 at p = 1.5 (common practice)
    local sw = ls.sweep{H0 = ls.matrix{{0, 0, 0}, {0, 1, 0}, {0, 0, 2.5}},
                        V = ls.matrix{{1, 0, 0}, {0, 0, 0}, {0, 0, -1}},
                        from = 0, to = 3, steps = 33, count = 3}
    local p = sw.p
    local l1, l2, l3 = sw:level(1), sw:level(2), sw:level(3)
    for k = 1, #p do
      assert.near(p[k], l1[k], 1e-13)
      assert.near(1, l2[k], 1e-13)
      assert.near(2.5 - p[k], l3[k], 1e-13)
    end
    local c = sw:crossings()
    assert.are.equal(3, #c)
    local want = {{1, {1, 2}}, {1.25, {1, 3}}, {1.5, {2, 3}}}
    for i, w in ipairs(want) do
      assert.are.equal("crossing", c[i].kind)
      assert.near(w[1], c[i].at, 1e-9)
      assert.near(0, c[i].gap, 1e-9)
      assert.are.same(w[2], c[i].levels)
    end
  end)

  it("tracks a lowest subset of a complex Hermitian model", function()
    -- spin-1 in a field along z plus a fixed transverse field along y:
    -- H = p Sz + 0.3 Sy, levels m * sqrt(p^2 + 0.09), m = -1, 0, 1 (common practice)
    local s = ls.spin(1)
    local sw = ls.sweep{H0 = 0.3 * s.Sy, V = s.Sz, from = -2, to = 2, steps = 50, count = 2}
    assert.are.equal(2, sw.count)
    local p, l1, l2 = sw.p, sw:level(1), sw:level(2)
    for k = 1, #p do
      local r = math.sqrt(p[k] ^ 2 + 0.09)
      assert.near(-r, l1[k], 1e-12)
      assert.near(0, l2[k], 1e-12)
    end
  end)

  it("gives identical numbers for 1 and 2 threads", function()
    -- independence of grid points (common practice)
    local o = ls.oscillator(30)
    local H0 = o.number + 0.5
    local V = o.x ^ 4 - 2 * o.x ^ 2
    local a = ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 37, count = 5, threads = 1}
    local b = ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 37, count = 5, threads = 2}
    local c = ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 37, count = 5, threads = 5}
    for lev = 1, 5 do
      assert.are.same(a:level(lev), b:level(lev))
      assert.are.same(a:level(lev), c:level(lev))
    end
    assert.are.same(a:crossings(), b:crossings())
  end)

  it("writes CSV that reads back", function()
    -- format: common practice (header line, comma-separated, %.17g round-trips doubles)
    local H0, V = two_level(0.2)
    local sw = ls.sweep{H0 = H0, V = V, from = -1, to = 1, steps = 10}
    local path = tmpname(".csv")
    sw:write(path)
    local f = assert(io.open(path))
    assert.are.equal("# H(p) = H0 + p V; energies in the model's units", f:read("l"))
    assert.are.equal("p,E1,E2", f:read("l"))
    local p, e1, e2 = sw.p, sw:level(1), sw:level(2)
    local k = 0
    for line in f:lines() do
      k = k + 1
      local a, b, c = line:match("^([^,]+),([^,]+),([^,]+)$")
      assert.are.equal(p[k], tonumber(a))
      assert.are.equal(e1[k], tonumber(b))
      assert.are.equal(e2[k], tonumber(c))
    end
    f:close()
    assert.are.equal(11, k)
    assert.is_nil(io.open(path .. ".tmp")) -- renamed away
    os.remove(path)
  end)

  it("writes JSON when the path ends in .json", function()
    -- format: common practice (RFC 8259 numbers, arrays, objects)
    local H0, V = two_level(0.2)
    local sw = ls.sweep{H0 = H0, V = V, from = -1, to = 1, steps = 4}
    local path = tmpname(".json")
    sw:write(path)
    local f = assert(io.open(path)); local text = f:read("a"); f:close()
    os.remove(path)
    assert.truthy(text:find('"p": [-1, -0.5, 0, 0.5, 1]', 1, true))
    assert.truthy(text:find('"levels": [', 1, true))
    assert.truthy(text:find('"kind": "avoided"', 1, true))
    assert.truthy(text:find('"levels": [1, 2]', 1, true))
  end)

  describe("errors", function()
    local H0, V = two_level(0.1)
    it("missing H0 or V, size mismatch, non-Hermitian", function()
      assert.error_matches(function() ls.sweep{V = V, from = 0, to = 1} end, "H0 is required", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, from = 0, to = 1} end, "V is required", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = ls.matrix{{1}}, from = 0, to = 1} end,
        "size mismatch: H0 is 2x2 but V is 1x1", 1, true)
      assert.error_matches(function() ls.sweep{H0 = ls.matrix{{0, 1}, {0.5, 0}}, V = V, from = 0, to = 1} end,
        "H0 is not Hermitian", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = ls.matrix{{0, 1}, {2, 0}}, from = 0, to = 1} end,
        "V is not Hermitian", 1, true)
    end)
    it("steps, count, from == to, threads, unknown options", function()
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 0} end,
        "steps must be from 1 to 1000000, got 0", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 1000001} end,
        "steps must be from 1 to 1000000, got 1000001", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, count = 3} end,
        "count must be from 1 to 2, got 3", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, count = 0} end,
        "count must be from 1 to 2, got 0", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0.5, to = 0.5} end,
        "from and to are equal", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0} end, "'to' is required", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, threads = 0} end,
        "threads must be from 1 to 64", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, stpes = 3} end,
        "unknown option 'stpes'", 1, true)
      local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 2}
      assert.error_matches(function() sw:level(3) end, "level must be from 1 to 2, got 3", 1, true)
    end)
    it("an unwritable path is named in the message", function()
      local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 2}
      assert.error_matches(function() sw:write("/nonexistent-dir/levels.csv") end,
        "cannot write '/nonexistent-dir/levels.csv'", 1, true)
    end)
  end)
end)
