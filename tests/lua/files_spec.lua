-- Files the tool writes (sw:write, sw:plot, the sweep journal): written to a
-- temporary name and renamed, so a full disk or an unwritable folder is a
-- clear error and an earlier file stays whole (common practice: write, fsync,
-- rename; POSIX rename(2) replaces the target atomically).
--
-- Root ignores file modes, so as root the tests mount a small tmpfs of their
-- own (64 KiB: "full disk") and remount it read-only ("unwritable folder");
-- without root they use a folder with mode 0555, and skip the full disk.
local ls = require "levelshift"

local function sh(cmd)
  local ok = os.execute(cmd .. " >/dev/null 2>&1")
  return ok == true or ok == 0
end

local function read(path)
  local f = io.open(path, "rb")
  if not f then return nil end
  local s = f:read("a")
  f:close()
  return s
end

local function listdir(dir)
  local p = io.popen("ls -A " .. dir)
  local t = {}
  for l in p:lines() do t[#t + 1] = l end
  p:close()
  table.sort(t)
  return table.concat(t, " ")
end

local function small_sweep(steps)
  -- invented two-level anticrossing
  return ls.sweep { H0 = ls.matrix { { 0, 0.15 }, { 0.15, 0 } }, V = ls.matrix { { 1, 0 }, { 0, -1 } },
    from = -1, to = 1, steps = steps or 20 }
end

local root = (io.popen("id -u"):read("l")) == "0"

-- a folder we can fill or make read-only; returns dir, ro(), rw(), full(), done()
local function scratch()
  local dir = os.tmpname()
  os.remove(dir)
  assert(sh("mkdir " .. dir))
  local mounted = root and sh("mount -t tmpfs -o size=64k,mode=0755 lvs-test " .. dir)
  local T = { dir = dir, mounted = mounted }
  function T.ro()
    if mounted then return sh("mount -o remount,ro " .. dir) end
    return not root and sh("chmod 0555 " .. dir)
  end
  function T.rw()
    if mounted then return sh("mount -o remount,rw " .. dir) end
    return sh("chmod 0755 " .. dir)
  end
  function T.fill() -- leave (almost) no free space on the tmpfs
    if not mounted then return false end
    sh("dd if=/dev/zero of=" .. dir .. "/filler bs=4k count=1000")
    return true
  end
  function T.done()
    T.rw()
    if mounted then sh("umount " .. dir) end
    sh("rm -rf " .. dir)
  end
  return T
end

describe("files written by levelshift", function()
  it("sw:write replaces the file atomically and leaves no temporary", function()
    local T = scratch()
    finally(T.done)
    local sw = small_sweep(10)
    local path = T.dir .. "/levels.csv"
    sw:write(path)
    local first = read(path)
    assert.truthy(first:find("^# H%(p%) = H0 %+ p V"))
    small_sweep(12):write(path)
    assert.are_not.equal(first, read(path))
    assert.are.equal("levels.csv", listdir(T.dir))
  end)

  it("an unwritable folder is a clear error and the earlier file stays", function()
    local T = scratch()
    finally(T.done)
    local path = T.dir .. "/levels.json"
    small_sweep(10):write(path)
    local before = read(path)
    if not T.ro() then
      pending("cannot make a folder read-only here (root without mount)")
      return
    end
    local sw = small_sweep(30)
    assert.error_matches(function() sw:write(path) end, "cannot write '" .. path .. "'", 1, true)
    local ok, e = pcall(sw.write, sw, path)
    assert.is_false(ok)
    assert.truthy(e:find("Read-only file system", 1, true) or e:find("Permission denied", 1, true), e)
    assert.are.equal(before, read(path))
    T.rw()
    assert.are.equal("levels.json", listdir(T.dir))
  end)

  it("a full disk is a clear error, the earlier file stays and no temporary is left", function()
    local T = scratch()
    finally(T.done)
    local path = T.dir .. "/levels.csv"
    small_sweep(10):write(path)
    local before = read(path)
    if not T.fill() then
      pending("no small tmpfs here (needs root and mount)")
      return
    end
    local big = small_sweep(4000) -- ~ 250 kB of text, more than the tmpfs holds
    local ok, e = pcall(big.write, big, path)
    assert.is_false(ok)
    assert.truthy(e:find("No space left on device", 1, true), e)
    assert.truthy(e:find("the file is unchanged", 1, true), e)
    assert.are.equal(before, read(path))
    assert.are.equal("filler levels.csv", listdir(T.dir))
  end)

  it("a path under /sys or in a missing folder is refused with the reason", function()
    local sw = small_sweep(5)
    local ok, e = pcall(sw.write, sw, "/sys/levelshift-test.csv")
    assert.is_false(ok)
    assert.truthy(e:find("cannot write '/sys/levelshift-test.csv'", 1, true), e)
    ok, e = pcall(sw.write, sw, "/nonexistent-dir-lvs/x.csv")
    assert.is_false(ok)
    assert.truthy(e:find("No such file or directory", 1, true), e)
    assert.error_matches(function() sw:write("") end, "file path", 1, true)
    assert.error_matches(function() sw:write({}) end, "write", 1, true)
  end)

  it("sw:plot keeps an earlier plot when the folder is unwritable or full", function()
    if not (ls.have_gnuplot and ls.have_gnuplot()) then
      pending("gnuplot is not installed")
      return
    end
    local T = scratch()
    finally(T.done)
    local path = T.dir .. "/levels.svg"
    local sw = small_sweep(10)
    sw:plot(path)
    local before = read(path)
    assert.truthy(before:find("<svg", 1, true))
    assert.error_matches(function() sw:plot(T.dir .. "/levels.pdf") end, "bad argument #1 to 'plot'", 1, true)
    assert.error_matches(function() sw:plot(path, 3) end, "bad argument #2 to 'plot'", 1, true)
    if T.ro() then
      local ok, e = pcall(sw.plot, sw, path)
      assert.is_false(ok)
      assert.truthy(e:find("sweep:plot", 1, true) and e:find(path, 1, true), e)
      assert.are.equal(before, read(path))
      T.rw()
    end
    if T.fill() then
      local ok, e = pcall(sw.plot, small_sweep(3000), path)
      assert.is_false(ok)
      assert.truthy(e:find("sweep:plot", 1, true), e)
      assert.are.equal(before, read(path))
      assert.are.equal("filler levels.svg", listdir(T.dir))
    end
  end)

  it("a sweep journal in an unwritable folder is refused with the reason", function()
    local T = scratch()
    finally(T.done)
    if not T.ro() then
      pending("cannot make a folder read-only here")
      return
    end
    local path = T.dir .. "/levels.csv"
    local ok, e = pcall(ls.sweep, { H0 = ls.matrix { { 0, 0.1 }, { 0.1, 0 } }, V = ls.matrix { { 1, 0 }, { 0, -1 } },
      from = -1, to = 1, steps = 10, out = path })
    assert.is_false(ok)
    assert.truthy(e:find("journal", 1, true) and e:find(path, 1, true), e)
    T.rw()
    assert.are.equal("", listdir(T.dir))
  end)
end)
