-- The levelshift program: scripts, -e, parameters, errors.
local bin = os.getenv("LVS_BIN") or "build/levelshift"

-- runs the program with args (and environment assignments `env`, e.g.
-- "NAME=value "); stdout and stderr, then "rc=<exit status>"
local function run(args, env)
  local f = io.popen((env or "") .. bin .. " " .. args .. " 2>&1; echo \"rc=$?\"")
  local out = f:read("a")
  f:close()
  return out
end

describe("levelshift program", function()
  it("prints help and version", function()
    assert.truthy(run("--help"):find("usage: levelshift FILE.lua", 1, true))
    assert.truthy(run("--version"):find("levelshift 0.1.0", 1, true))
  end)
  -- LAPACK/BLAS are opened on first use (csrc/core/lazyla.c): a script
  -- that needs none never maps them; one that needs them finds them; a
  -- library that cannot be opened is named, exit status 127 as from the
  -- dynamic loader (common practice).
  it("opens LAPACK and BLAS only when a computation needs them", function()
    local probe = "local function mapped() local f = io.open('/proc/self/maps'); "
      .. "local t = f:read('a'); f:close(); return t:find('lapacke', 1, true) ~= nil end; "
      .. "local before = mapped(); local w = ls.eigen(ls.matrix{{2, 1}, {1, 2}}); "
      .. "print(before, mapped(), w[1], w[2])"
    local out = run("-e \"" .. probe .. "\"")
    assert.truthy(out:find("false\ttrue\t1.0\t3.0", 1, true), out)
  end)
  it("opens them on request with ls.linalg and names them", function()
    local probe = "local f = io.open('/proc/self/maps'); local before = f:read('a'):find('lapacke', 1, true) ~= nil; f:close(); "
      .. "local l = ls.linalg(); print(before, l.lapacke, l.cblas, math.type(l.blas_threads))"
    local out = run("-e \"" .. probe .. "\"")
    assert.truthy(out:find("false\tliblapacke.so.3\tlibopenblas.so.0\tinteger", 1, true), out)
    out = run("-e 'ls.linalg()'", "LVS_CBLAS=/nonexistent/libcblas-missing.so ")
    assert.truthy(out:find("cannot load /nonexistent/libcblas-missing.so", 1, true), out)
    assert.truthy(out:find("rc=127", 1, true), out)
    assert.truthy(run("-e 'ls.linalg(1)'"):find("ls.linalg takes no arguments", 1, true))
  end)
  it("names a LAPACKE it cannot open and exits with 127", function()
    local env = "LVS_LAPACKE=/nonexistent/liblapacke-missing.so "
    local out = run("-e 'print(ls.clock() >= 0)'", env)
    assert.truthy(out:find("true", 1, true), out)
    assert.truthy(out:find("rc=0", 1, true), out)
    out = run("-e 'ls.eigen(ls.matrix{{2, 1}, {1, 2}})'", env)
    assert.truthy(out:find("cannot load /nonexistent/liblapacke-missing.so", 1, true), out)
    assert.truthy(out:find("rc=127", 1, true), out)
  end)
  it("names an unknown option instead of taking it for a recipe", function()
    local out = run("--bogus")
    assert.truthy(out:find("unknown option '--bogus'", 1, true))
    assert.truthy(out:find("rc=2", 1, true))
  end)
  it("runs code with parameters parsed as numbers", function()
    local out = run("-e 'local p = ...; print(p.g * 2, math.type(p.n), p.name)' g=0.25 n=3 name=abc")
    assert.truthy(out:find("0.5\tinteger\tabc", 1, true))
    assert.truthy(out:find("rc=0", 1, true))
  end)
  it("runs a script file with ls loaded", function()
    local path = os.tmpname()
    local f = io.open(path, "w")
    f:write("print(#ls.eigen(ls.spin(1).Sz), params.k)\n")
    f:close()
    local out = run(path .. " k=7")
    os.remove(path)
    assert.truthy(out:find("3\t7", 1, true))
  end)
  it("prints the message and a traceback and exits non-zero on an error", function()
    local out = run("-e 'ls.spin(0.3)'")
    assert.truthy(out:find("levelshift: ", 1, true))
    assert.truthy(out:find("positive multiple of 1/2", 1, true))
    assert.truthy(out:find("stack traceback", 1, true))
    assert.truthy(out:find("rc=1", 1, true))
  end)
  it("refuses a malformed parameter", function()
    local out = run("-e 'print(1)' oops")
    assert.truthy(out:find("not of the form name=value", 1, true))
    assert.falsy(out:find("rc=0", 1, true))
  end)
end)
