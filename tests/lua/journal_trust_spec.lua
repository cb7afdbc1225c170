-- Journals and shard parts are trusted only when their records solve the
-- model at their own points: a foreign family with the same end points, a
-- forged record with a valid checksum and a record holding inf are refused
-- with the file and the point named; a torn record costs only itself.
local ls = require "levelshift"

local dir = (io.open("/dev/shm/.lvs-probe", "w") and (os.remove("/dev/shm/.lvs-probe") or true)) and "/dev/shm/"
  or "/tmp/"
local function ftmp(suffix)
  return dir .. "lvs-trust-" .. os.time() .. "-" .. math.random(1, 1e9) .. suffix
end
local function slurp(path)
  local f = io.open(path, "rb")
  if not f then return nil end
  local t = f:read("a")
  f:close()
  return t
end
local function spit(path, text)
  local f = assert(io.open(path, "wb"))
  f:write(text)
  f:close()
end

-- FNV-1a, 64 bits (Fowler, Noll, Vo; the journal's record checksum): Lua
-- integers wrap modulo 2^64 as the C code's uint64_t does
local function fnv1a(s)
  local h = -3750763034362895579 -- 14695981039346656037 as a signed 64-bit integer
  for i = 1, #s do
    h = h ~ s:byte(i)
    h = h * 1099511628211
  end
  return h
end

-- an invented dense model: H0 = diag(0..n-1), V_ij = 1/(1 + |i - j|)
local n, count, steps = 12, 3, 10
local function mats()
  local h0, v = {}, {}
  for i = 1, n do
    h0[i], v[i] = {}, {}
    for j = 1, n do
      h0[i][j] = (i == j) and (i - 1) or 0
      v[i][j] = 1 / (1 + math.abs(i - j))
    end
  end
  return ls.matrix(h0), ls.matrix(v)
end
local H0, V = mats()
local JHEAD, REC = 48, 8 * (2 + count + n * count) -- header; k, energies, vectors, checksum

local function run(spec)
  spec.from, spec.to, spec.steps, spec.count, spec.progress = 0, 1, steps, count, false
  return ls.sweep(spec)
end

-- record r (0-based) of a part file: its energies changed by f, the checksum
-- made valid again
local function forge(part, r, f)
  local t = slurp(part)
  local off = JHEAD + r * REC
  local rec = t:sub(off + 1, off + REC)
  local e = {}
  for a = 1, count do e[a] = f(string.unpack("<d", rec, 8 + 8 * (a - 1) + 1)) end
  local body = rec:sub(1, 8) .. string.pack("<" .. ("d"):rep(count), table.unpack(e)) .. rec:sub(9 + 8 * count, REC - 8)
  local new = body .. string.pack("<i8", fnv1a(body))
  spit(part, t:sub(1, off) .. new .. t:sub(off + REC + 1))
end

-- merge the parts of out, compare with the file of one uninterrupted run
-- (a merge equals one run byte for byte: docs/sweeps.md), remove both
local function merged_equals_single_run(out)
  run{H0 = H0, V = V, out = out, merge = true}
  local ref = ftmp(".csv")
  run{H0 = H0, V = V, out = ref}
  assert.are.equal(slurp(ref), slurp(out))
  os.remove(out); os.remove(ref)
end

describe("journal trust", function()
  it("refuses the records of another family with the same end points", function()
    -- H(p) = H0 + p V and H0 + p^2 V agree at p = 0 and p = 1 only
    local out = ftmp(".csv")
    local A = function(p) return H0 + p * V end
    local B = function(p) return H0 + (p * p) * V end
    run{H = A, out = out, shard = "1/2"}
    run{H = B, out = out, shard = "2/2"}
    assert.truthy(slurp(out .. ".part.1-of-2"))
    local ok, e = pcall(run, {H = B, out = out, merge = true})
    assert.is_false(ok)
    assert.truthy(tostring(e):find("does not solve H(p) there", 1, true), e)
    assert.truthy(tostring(e):find(out .. ".part.1-of-2", 1, true), e)
    assert.truthy(tostring(e):find("the record of point %d+ %(p = "), e)
    assert.is_nil(slurp(out)) -- nothing merged
    -- the family the parts came from merges them
    run{H = A, out = out, shard = "2/2"}
    os.remove(out .. ".part.2-of-2")
    run{H = A, out = out, shard = "2/2"}
    run{H = A, out = out, merge = true}
    assert.truthy(slurp(out))
    os.remove(out)
  end)

  it("refuses a forged energy and an infinite one behind valid checksums (merge)", function()
    local out = ftmp(".csv")
    run{H0 = H0, V = V, out = out, shard = "1/2"}
    run{H0 = H0, V = V, out = out, shard = "2/2"}
    local part = out .. ".part.1-of-2"
    local saved = slurp(part)
    forge(part, 1, function(x) return x + 1e-3 end) -- a shifted level
    local ok, e = pcall(run, {H0 = H0, V = V, out = out, merge = true})
    assert.is_false(ok)
    assert.truthy(tostring(e):find("does not solve H(p) there", 1, true), e)
    spit(part, saved)
    forge(part, 2, function() return math.huge end)
    local t0 = os.clock()
    ok, e = pcall(run, {H0 = H0, V = V, out = out, merge = true})
    assert.is_false(ok)
    assert.truthy(tostring(e):find("NaN or infinite", 1, true), e)
    assert.is_true(os.clock() - t0 < 5) -- refused, not a hang in the level matching
    -- the untouched parts still merge into the file of a single run
    spit(part, saved)
    merged_equals_single_run(out)
  end)

  it("loses only a torn record, not the ones after it", function()
    local out = ftmp(".csv")
    run{H0 = H0, V = V, out = out, shard = "1/1"}
    local part = out .. ".part.1-of-1"
    local t = slurp(part)
    local nrec = (#t - JHEAD) // REC
    assert.are.equal(steps + 1, nrec)
    -- one byte of record 3 flipped: its checksum fails, the others stand
    local off = JHEAD + 3 * REC + 20
    spit(part, t:sub(1, off) .. string.char((t:byte(off + 1) + 1) % 256) .. t:sub(off + 2))
    -- the resumed shard computes that point alone (one record appended: a
    -- scan that stopped at the torn record would redo the seven after it)
    run{H0 = H0, V = V, out = out, shard = "1/1"}
    assert.are.equal(nrec + 1, (#slurp(part) - JHEAD) // REC)
    merged_equals_single_run(out)
  end)
  it("lets one run at a time write a journal (a lock on the file)", function()
    local bin = os.getenv("LVS_BIN") or "build/levelshift"
    local out = ftmp(".csv")
    local code = "local o = ls.oscillator(200); ls.sweep{H0 = o.number, V = o.x ^ 2, from = 0, to = 1, "
      .. "steps = 20000, count = 4, progress = false, out = '" .. out .. "'}"
    local f = io.popen(bin .. " -e \"" .. code .. "\" >/dev/null 2>&1 & echo $!")
    local pid = f:read("l")
    f:close()
    for _ = 1, 400 do -- until the first run holds its journal
      local part = slurp(out .. ".part")
      if part and #part > 48 then break end
      os.execute("sleep 0.01")
    end
    local o = ls.oscillator(200)
    local ok, e = pcall(ls.sweep, {H0 = o.number, V = o.x ^ 2, from = 0, to = 1, steps = 20000, count = 4,
      progress = false, out = out})
    os.execute("kill -9 " .. pid .. " 2>/dev/null")
    assert.is_false(ok)
    assert.truthy(tostring(e):find("is in use by another run", 1, true), e)
    os.remove(out .. ".part"); os.remove(out)
  end)
end)
