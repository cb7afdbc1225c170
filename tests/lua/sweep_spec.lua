-- Sweeps of a coupling or a field: H(p) = H0 + p V, levels tracked by overlap.
local ls = require "levelshift"

local function two_level(g)
  -- H(p) = [[p, g], [g, -p]] = H0 + p V with H0 = [[0, g], [g, 0]], V = diag(1, -1)
  return ls.matrix{{0, g}, {g, 0}}, ls.matrix{{1, 0}, {0, -1}}
end

local function tmpname(suffix)
  local base = os.tmpname() -- created empty by Lua: removed, only the name is used
  os.remove(base)
  return base .. suffix
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
    local left = io.popen("ls " .. path .. ".tmp* 2>/dev/null"):read("a")
    assert.are.equal("", left) -- the temporary (path.tmp.PID) was renamed away
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
    -- read back with an independent decoder (dkjson, Debian lua-dkjson)
    local doc = assert(require("dkjson").decode(text))
    assert.are.same({ -1, -0.5, 0, 0.5, 1 }, doc.p)
    assert.are.equal(2, #doc.levels)
    for a = 1, 2 do -- every double comes back bit for bit (%.17g)
      local e = sw:level(a)
      for k = 1, 5 do assert.are.equal(e[k], doc.levels[a][k]) end
    end
    assert.are.equal("avoided", doc.crossings[1].kind)
    assert.are.same({ 1, 2 }, doc.crossings[1].levels)
    assert.truthy(doc.about:find("H(p) = H0 + p V", 1, true))
  end)

  it("puts RS series curves beside the exact ones (two-level, second order)", function()
    -- H0 = diag(0, 1), V = g sigma_x: exact E = 1/2 -+ sqrt(1/4 + g^2 p^2) (closed form, common
    -- practice); second-order RS E(0) = -g^2 p^2, E(1) = 1 + g^2 p^2 (Griffiths, Introduction to
    -- Quantum Mechanics, 2nd ed. (2005), eq. 6.15)
    local g = 0.3
    local sw = ls.sweep{H0 = ls.matrix{{0, 0}, {0, 1}}, V = ls.matrix{{0, g}, {g, 0}},
                        from = -0.5, to = 0.5, steps = 10, series = 2, param = "F", param_unit = "V/m",
                        energy_unit = "eV"}
    assert.are.equal(2, sw.series_order)
    local p, e1, s1, s2 = sw.p, sw:level(1), sw:series(1), sw:series(2)
    for k = 1, #p do
      assert.near(0.5 - math.sqrt(0.25 + g ^ 2 * p[k] ^ 2), e1[k], 1e-14)
      assert.near(-g ^ 2 * p[k] ^ 2, s1[k], 1e-14)
      assert.near(1 + g ^ 2 * p[k] ^ 2, s2[k], 1e-14)
    end
    local path = tmpname(".csv")
    sw:write(path)
    local f = assert(io.open(path))
    assert.are.equal("# H(F) = H0 + F V; F in V/m; energies in eV; E<k>_series: "
      .. "Rayleigh-Schroedinger series to order 2", f:read("l"))
    assert.are.equal("F,E1,E2,E1_series,E2_series", f:read("l"))
    local a, b, c, d, e = f:read("l"):match("^([^,]+),([^,]+),([^,]+),([^,]+),([^,]+)$")
    assert.are.equal(-0.5, tonumber(a)); assert.are.equal(e1[1], tonumber(b))
    assert.are.equal(s1[1], tonumber(d)); assert.are.equal(s2[1], tonumber(e))
    f:close(); os.remove(path)
    local plain = ls.sweep{H0 = ls.matrix{{0, 0}, {0, 1}}, V = ls.matrix{{0, g}, {g, 0}}, from = 0, to = 1, steps = 2}
    assert.is_nil(plain:series(1))
    assert.are.equal(0, plain.series_order)
  end)

  it("takes the band path for a banded model and agrees with the dense solver", function()
    -- quartic oscillator N + 1/2 + lambda x^4: ground level 0.559146 at lambda = 0.1 (Hioe and
    -- Montroll, J. Math. Phys. 16, 1945 (1975), table; from memory to 6 digits); all levels equal
    -- to the dense LAPACK solver's (common practice)
    local o = ls.oscillator(80)
    local H0, V = o.number + 0.5, o.x ^ 4
    local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 0.1, steps = 8, count = 6}
    local p = sw.p
    assert.near(0.559146, sw:level(1)[#p], 5e-7)
    for _, k in ipairs{1, 4, 9} do
      local E = ls.eigen(H0 + p[k] * V, {count = 6})
      for a = 1, 6 do assert.near(E[a], sw:level(a)[k], 1e-11 * (1 + math.abs(E[a]))) end
    end
  end)

  it("follows true crossings straight through on the band path", function()
    -- two uncoupled chains interleaved on even and odd sites (half-bandwidth 2): levels of
    -- different chains cross exactly, each tracked level must stay on one chain's curve
    -- (block-diagonal H: the spectra of the blocks are independent; common practice)
    local n = 40
    local function chains(pick)
      local h0, v, idx = {}, {}, {}
      for i = 1, n do if pick == nil or (i % 2 == pick) then idx[#idx + 1] = i end end
      for a, i in ipairs(idx) do
        h0[a], v[a] = {}, {}
        for b, j in ipairs(idx) do
          local d = 0
          if i == j then d = (i % 2 == 1) and (i - 1) / 2 or 0.3 + (i - 2) / 2 end
          if math.abs(i - j) == 2 then d = 0.1 end
          h0[a][b] = d
          v[a][b] = (i == j) and ((i % 2 == 1) and 1 or -1) or 0
        end
      end
      return ls.matrix(h0), ls.matrix(v)
    end
    local H0, V = chains(nil)
    -- all levels in the window (a level leaving a partial window is another matter)
    local sw = ls.sweep{H0 = H0, V = V, from = -1, to = 1, steps = 40, count = n}
    local A0, AV = chains(1)
    local B0, BV = chains(0)
    local p = sw.p
    local curves = {}
    for k = 1, #p do
      local ea, eb = ls.eigen(A0 + p[k] * AV), ls.eigen(B0 + p[k] * BV)
      for j = 1, n // 2 do
        curves["A" .. j] = curves["A" .. j] or {}; curves["A" .. j][k] = ea[j]
        curves["B" .. j] = curves["B" .. j] or {}; curves["B" .. j][k] = eb[j]
      end
    end
    local seen = 0
    for a = 1, n do
      local e = sw:level(a)
      local which
      for name, c in pairs(curves) do if math.abs(c[1] - e[1]) < 1e-10 then which = name end end
      assert.truthy(which, "level " .. a .. " starts on no chain level")
      for k = 1, #p do assert.near(curves[which][k], e[k], 1e-10) end
      seen = seen + 1
    end
    assert.are.equal(n, seen)
    local kinds = {}
    for _, c in ipairs(sw:crossings()) do kinds[c.kind] = (kinds[c.kind] or 0) + 1 end
    assert.is_true((kinds.crossing or 0) >= 1)
  end)

  it("splits a parity-symmetric model into sectors and agrees with the dense path", function()
    -- N + 1/2 + lambda x^4 couples n only to n, n +- 2, n +- 4: two parity sectors, so the
    -- sector path runs (real, banded, n >= 16). Ground level at lambda = 0.1: 0.559146327183519
    -- (Hioe and Montroll, J. Math. Phys. 16, 1945 (1975), table; from memory); every level equal
    -- to the dense solver's (the H = function form never takes the band path; common practice)
    local o = ls.oscillator(80)
    local H0, V = o.number + 0.5, o.x ^ 4
    local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 0.1, steps = 10, count = 8}
    local dense = ls.sweep{H = function(p) return H0 + p * V end, from = 0, to = 0.1, steps = 10, count = 8}
    assert.near(0.559146327183519, sw:level(1)[11], 1e-12)
    for a = 1, 8 do
      local x, y = sw:level(a), dense:level(a)
      for k = 1, 11 do assert.near(y[k], x[k], 1e-12 * (1 + math.abs(y[k]))) end
    end
    local one = ls.sweep{H0 = H0, V = V, from = 0, to = 0.1, steps = 10, count = 8, threads = 1}
    for a = 1, 8 do
      local x, y = sw:level(a), one:level(a)
      for k = 1, 11 do assert.are.equal(y[k], x[k]) end
    end
  end)

  it("follows a true crossing between parity sectors straight through", function()
    -- H(p) = N + 1/2 + 0.1 x^2 + p P with P = (-1)^N the parity: P commutes with H0, so every
    -- level is E_j +- p exactly, a straight line of slope +1 (even) or -1 (odd), and even and
    -- odd levels cross without coupling; the lowest even level is omega/2 + p with
    -- omega = sqrt(1 + 2 * 0.1) (harmonic oscillator with a stiffer spring; common practice)
    local n = 40
    local o = ls.oscillator(n)
    local rows = {}
    for i = 1, n do
      rows[i] = {}
      for j = 1, n do rows[i][j] = (i == j) and ((i % 2 == 1) and 1 or -1) or 0 end
    end
    local sw = ls.sweep{H0 = o.number + 0.5 + 0.1 * o.x ^ 2, V = ls.matrix(rows), from = 0, to = 1.5, steps = 30,
                        count = n}
    local p = sw.p
    local even0
    for a = 1, n do
      local e = sw:level(a)
      local slope = (e[2] - e[1]) / (p[2] - p[1])
      assert.near(1, math.abs(slope), 1e-9)
      for k = 1, #p do assert.near(e[1] + slope * (p[k] - p[1]), e[k], 1e-10) end
      if a == 1 then even0 = e end
    end
    local omega = math.sqrt(1.2)
    for k = 1, #p do assert.near(omega / 2 + p[k], even0[k], 1e-10) end
    local kinds = {}
    for _, c in ipairs(sw:crossings()) do kinds[c.kind] = (kinds[c.kind] or 0) + 1 end
    assert.is_true((kinds.crossing or 0) >= 1)
    assert.are.equal(0, kinds.avoided or 0)
  end)

  it("sweeps a family given as a Lua function p -> op", function()
    -- spin-1 with D Sz^2 in a tilted field: the function form must give the numbers of the
    -- H0 + p V form of the same model (common practice); the avoided crossing near B = D
    local s, t = ls.spin(1), 0.05
    local fam = ls.sweep{H = function(B) return s.Sz ^ 2 + B * (math.cos(t) * s.Sz + math.sin(t) * s.Sx) end,
                         from = 0, to = 2, steps = 40, count = 3}
    local lin = ls.sweep{H0 = s.Sz ^ 2, V = math.cos(t) * s.Sz + math.sin(t) * s.Sx, from = 0, to = 2,
                         steps = 40, count = 3}
    for a = 1, 3 do
      local x, y = fam:level(a), lin:level(a)
      for k = 1, 41 do assert.near(y[k], x[k], 1e-12) end
    end
    local cf, cl = fam:crossings(), lin:crossings()
    assert.are.equal(#cl, #cf)
    assert.near(cl[1].at, cf[1].at, 1e-9)
    assert.near(cl[1].gap, cf[1].gap, 1e-12)
    assert.error_matches(function()
      ls.sweep{H = function(B) if B > 0.2 and B < 0.4 then error("no model here") end return s.Sz end,
               from = 0, to = 0.5, steps = 4}
    end, "H(p) at p = 0.25: ", 1, true)
    assert.error_matches(function() ls.sweep{H = function() return s.Sz end, series = 2, from = 0, to = 1} end,
      "series needs H0 and V", 1, true)
    assert.error_matches(function() ls.sweep{H = 3, from = 0, to = 1} end, "H must be a function p -> op", 1, true)
    assert.error_matches(function() ls.sweep{H = function() return 1 end, from = 0, to = 1} end,
      "must return an op", 1, true)
    assert.error_matches(function() ls.sweep{H = function() return s.Sz end, H0 = s.Sz, from = 0, to = 1} end,
      "give either H (a function p -> op) or H0 and V, not both", 1, true)
  end)

  describe("files, plots, resume and shards", function()
    local bin = os.getenv("LVS_BIN") or "build/levelshift"
    local function sh(cmd)
      local f = io.popen(cmd .. " 2>&1; echo \"rc=$?\"")
      local out = f:read("a"); f:close()
      return out
    end
    local function slurp(path)
      local f = io.open(path, "rb"); if not f then return nil end
      local t = f:read("a"); f:close(); return t
    end
    local function script(body)
      local path = tmpname(".lua")
      local f = assert(io.open(path, "w")); f:write(body); f:close()
      return path
    end
    -- journals and outputs in /dev/shm when there is one: fsync there is cheap, the
    -- semantics (append, kill, rename) are the same
    local dir = (io.open("/dev/shm/.lvs-probe", "w") and (os.remove("/dev/shm/.lvs-probe") or true))
      and "/dev/shm/" or "/tmp/"
    local function ftmp(suffix)
      return dir .. "lvs-sweep-" .. os.time() .. "-" .. math.random(1, 1e9) .. suffix
    end
    -- an invented dense model: H0 = diag(0..n-1), V_ij = 1/(1 + |i - j|)
    local model = [[
local n = params.n or 40
local h0, v = {}, {}
for i = 1, n do
  h0[i], v[i] = {}, {}
  for j = 1, n do h0[i][j] = (i == j) and (i - 1) or 0; v[i][j] = 1 / (1 + math.abs(i - j)) end
end
local sw = ls.sweep{H0 = ls.matrix(h0), V = ls.matrix(v), from = 0, to = 2, steps = params.steps or 30,
  count = 4, threads = params.threads or 2, out = params.out, progress = false}
]]

    it("writes the out file atomically and removes the journal", function()
      -- write-then-rename is the POSIX atomic replacement (rename(2)); common practice
      local out = ftmp(".csv")
      local s = script(model)
      local r = sh(bin .. " " .. s .. " out=" .. out)
      assert.truthy(r:find("rc=0", 1, true), r)
      local text = slurp(out)
      assert.truthy(text:find("^# H%(p%) = H0 %+ p V"))
      assert.is_nil(slurp(out .. ".part"))
      assert.is_nil(slurp(out .. ".tmp"))
      os.remove(out); os.remove(s)
    end)

    it("resumes a run killed by SIGKILL and ends with the same bytes", function()
      -- the kill is real (kill -9 from the shell once the journal holds points); the resumed
      -- run must equal an uninterrupted one byte for byte (common practice: checkpoint/restart)
      local s = script(model)
      local ref, out = ftmp(".csv"), ftmp(".csv")
      local args = " n=160 steps=120 out="
      -- reference: uninterrupted, two threads; the killed run uses one (same numbers either way)
      assert.truthy(sh(bin .. " " .. s .. args .. ref):find("rc=0", 1, true))
      local rec = 8 * (2 + 4 + 160 * 4)
      local r = sh(string.format([[
%s %s threads=1%s%s >/dev/null 2>&1 &
pid=$!
i=0
while [ "$(stat -c %%s %s.part 2>/dev/null || echo 0)" -lt %d ] && [ $i -lt 2000 ]; do sleep 0.005; i=$((i+1)); done
kill -9 $pid
wait $pid
echo "killed=$?"]], bin, s, args, out, out, 48 + 5 * rec))
      assert.truthy(r:find("killed=137", 1, true), r) -- 128 + SIGKILL: it did not finish on its own
      assert.is_nil(slurp(out)) -- no final file from the killed run
      local part = slurp(out .. ".part")
      local done = (#part - 48) // rec
      assert.is_true(done >= 5 and done < 121, "points on disk: " .. done)
      local r2 = sh(bin .. " " .. s .. args .. out)
      assert.truthy(r2:find("rc=0", 1, true), r2)
      assert.are.equal(slurp(ref), slurp(out))
      assert.is_nil(slurp(out .. ".part"))
      os.remove(ref); os.remove(out); os.remove(s)
    end)

    it("joins shards (--shard, array-job variables) into the bytes of one run", function()
      -- deterministic round-robin shares; merge == single run byte for byte (common practice)
      local s = script(model)
      local ref, out = ftmp(".json"), ftmp(".json")
      assert.truthy(sh(bin .. " " .. s .. " out=" .. ref):find("rc=0", 1, true))
      local r1 = sh(bin .. " " .. s .. " --shard 1/3 out=" .. out)
      assert.truthy(r1:find("shard 1/3 of " .. out, 1, true), r1)
      assert.truthy(r1:find("rc=0", 1, true), r1)
      -- shard 2 through the scheduler's variables (task ids 5..7, this is the second)
      local r2 = sh("SLURM_ARRAY_TASK_ID=6 SLURM_ARRAY_TASK_COUNT=3 SLURM_ARRAY_TASK_MIN=5 "
        .. bin .. " " .. s .. " out=" .. out)
      assert.truthy(r2:find("shard 2/3", 1, true), r2)
      local early = sh(bin .. " " .. s .. " --merge out=" .. out)
      assert.truthy(early:find("points are in no part file", 1, true), early)
      assert.truthy(early:find("rc=1", 1, true), early)
      assert.is_nil(slurp(out .. ".part")) -- a merge reads, it starts no journal
      assert.truthy(sh(bin .. " " .. s .. " --shard 3/3 out=" .. out):find("rc=0", 1, true))
      local m = sh(bin .. " " .. s .. " --merge out=" .. out)
      assert.truthy(m:find("rc=0", 1, true), m)
      assert.are.equal(slurp(ref), slurp(out))
      for k = 1, 3 do assert.is_nil(slurp(out .. ".part." .. k .. "-of-3")) end
      assert.is_nil(slurp(out .. ".part"))
      local bad = sh(bin .. " " .. s .. " --shard 4/3 out=" .. out)
      assert.truthy(bad:find("--shard needs K/N with 1 <= K <= N", 1, true), bad)
      os.remove(ref); os.remove(out); os.remove(s)
    end)

    it("shows progress on stderr only when it is a terminal", function()
      -- a pseudo-terminal from util-linux `script` (common practice for testing tty behaviour)
      local code = "local o = ls.oscillator(40); ls.sweep{H0 = o.number, V = o.x^4, from = 0, to = 1, steps = 30, count = 3}"
      local plain = sh(bin .. " -e '" .. code .. "'")
      assert.is_nil(plain:find("sweep: ", 1, true))
      if not os.execute("command -v script >/dev/null 2>&1") then
        print("\nSKIPPED: progress on a terminal: no `script` program (util-linux) here")
        return
      end
      local tty = sh("script -qec \"" .. bin .. " -e '" .. code .. "'\" /dev/null")
      assert.truthy(tty:find("sweep: 31/31 points", 1, true), tty)
    end)

    it("refuses a journal of another sweep", function()
      local out = tmpname(".csv")
      local f = io.open(out .. ".part", "wb"); f:write(("x"):rep(100)); f:close()
      local H0, V = two_level(0.1)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, out = out, progress = false} end,
        "belongs to another sweep", 1, true)
      os.remove(out .. ".part"); os.remove(out)
    end)

    it("draws SVG and PNG level diagrams with gnuplot", function()
      -- file formats: SVG 1.1 root element <svg> (W3C, 2011); PNG signature 89 50 4E 47 0D 0A 1A 0A
      -- (RFC 2083, 1997, section 3.1)
      if not ls.have_gnuplot() then
        print("\nSKIPPED: sweep plot tests: gnuplot is not installed (Debian package gnuplot-nox)")
        local H0, V = two_level(0.1)
        local sw = ls.sweep{H0 = H0, V = V, from = -1, to = 1, steps = 4}
        assert.error_matches(function() sw:plot(tmpname(".svg")) end, "install the Debian package gnuplot-nox", 1, true)
        return
      end
      local H0, V = ls.matrix{{0, 0}, {0, 1}}, ls.matrix{{0, 0.3}, {0.3, 0}}
      local sw = ls.sweep{H0 = H0, V = V, from = -2, to = 2, steps = 40, series = 2, param = "F",
                          param_unit = "kV/cm", energy_unit = "meV"}
      local svg, png = tmpname(".svg"), tmpname(".png")
      sw:plot(svg, {title = "invented two-level field sweep"})
      sw:plot(png)
      local t = slurp(svg)
      assert.truthy(t:find("<svg", 1, true))
      assert.truthy(t:find("</svg>%s*$"))
      assert.truthy(t:find("F (kV/cm)", 1, true))
      assert.truthy(t:find("energy (meV)", 1, true))
      assert.truthy(t:find("series, order 2", 1, true))
      assert.truthy(t:find("crossings", 1, true))
      local b = slurp(png)
      assert.are.equal("\137PNG\r\n\26\n", b:sub(1, 8))
      assert.are.equal("IHDR", b:sub(13, 16))
      assert.is_true(#b > 2000)
      assert.is_nil(slurp(svg .. ".tmp")); assert.is_nil(slurp(png .. ".tmp"))
      os.remove(svg); os.remove(png)
      assert.error_matches(function() sw:plot("x.pdf") end, "a path ending in .svg or .png expected", 1, true)
    end)
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
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, series = -1} end,
        "series must be an order from 1 to 1000 (0: none), got -1", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, out = 3} end,
        "'out' must be a file path", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, plot = "a.pdf"} end,
        "'plot' must be a path ending in .svg or .png", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, shard = "2/8"} end,
        "a shard needs 'out'", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, shard = "9/8", out = "x.csv"} end,
        "shard must be from 1 to shards", 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, shard = "two", out = "x.csv"} end,
        'shard must be "k/n"', 1, true)
      assert.error_matches(function() ls.sweep{H0 = H0, V = V, from = 0, to = 1, param = 5} end,
        "'param' must be a string", 1, true)
      assert.error_matches(function() sw:series(0) end, "level must be from 1 to 2, got 0", 1, true)
    end)
    it("an unwritable path is named in the message", function()
      local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 1, steps = 2}
      assert.error_matches(function() sw:write("/nonexistent-dir/levels.csv") end,
        "cannot write '/nonexistent-dir/levels.csv'", 1, true)
    end)
  end)
  it("numbers levels degenerate at `from` by their order just after it", function()
    -- H(p) = p diag(1, -1, 0.5) on a zero H0: all three degenerate at p = 0.
    -- Level a must be the a-th lowest just after from (common practice).
    local sw = ls.sweep{ H0 = ls.matrix{ { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 0 } },
      V = ls.matrix{ { 1, 0, 0 }, { 0, -1, 0 }, { 0, 0, 0.5 } }, from = 0, to = 1, steps = 10 }
    local slopes = { -1, 0.5, 1 }
    for a = 1, 3 do
      local e = sw:level(a)
      for k, p in ipairs(sw.p) do assert.is_true(math.abs(e[k] - slopes[a] * p) < 1e-12) end
    end
  end)
  it("keeps control characters out of the gnuplot script", function()
    -- a newline would end gnuplot's quoted string and start a command of the
    -- caller's choosing (gnuplot's system() runs a shell): common practice
    local o = ls.oscillator(12)
    local sw = ls.sweep { H0 = o.number, V = o.x ^ 2, from = 0, to = 0.1, steps = 2, count = 2, progress = false }
    local dir = os.tmpname()
    os.remove(dir)
    assert.error_matches(function() sw:plot(dir .. ".svg", { title = "a\nsystem('touch " .. dir .. "')" }) end,
      "bad argument #2 to 'plot' (option 'title' contains a control character", 1, true)
    assert.error_matches(function() sw:plot(dir .. "\n.svg") end,
      "bad argument #1 to 'plot' (the path contains a control character", 1, true)
    assert.is_nil(io.open(dir, "r"))
    assert.is_nil(io.open(dir .. ".svg", "r"))
  end)
end)
