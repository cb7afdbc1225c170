-- Every error message the manual (docs/errors.md and the other docs/ files) documents, provoked once and matched, so a
-- documented text cannot drift from what the tool prints (common practice).
-- Other specs test the same paths in context; this file is the index.
local ls = require "levelshift"
local bin = os.getenv("LVS_BIN") or "build/levelshift"

local function run(args)
  local f = io.popen(args .. " 2>&1; echo \"rc=$?\"")
  local out = f:read("a")
  f:close()
  return out
end

local function errs(text, f)
  assert.error_matches(f, text, 1, true)
end

describe("documented errors", function()
  it("eigen: non-Hermitian input, the dense cap, ls.config", function()
    errs("bad argument #1 to 'eigen' (matrix is not Hermitian: |H(1,2) - conj(H(2,1))| = 1.5 (largest entry 2))", function() return ls.eigen(ls.matrix { { 1, 2 }, { 0.5, 1 } }) end)
    local P = ls.product(ls.spin(0.5), 21) -- 2,097,152 states
    errs("eigen: eigenvectors: 2097152x2097152 dense storage needs 3.52e+04 GB, above the dense cap of 4.29 GB "
      .. "(raise it with ls.config{dense_cap = bytes} if the machine has the memory)",
      function() return ls.eigen(P:site(1).Sz) end)
    errs("dense_cap must be a positive number of bytes", function() return ls.config({ dense_cap = -1 }) end)
    errs("option 'blocks': entry (2, 1) = 0.1 couples two blocks", function() return ls.eigen(ls.matrix { { 1, 0.1, 0 }, { 0.1, 1, 0 }, { 0, 0, 2 } }, { blocks = { { 1 }, { 2, 3 } } }) end)
  end)

  it("s:pade refuses orders past the series, also math.maxinteger (L + M wraps around)", function()
    -- (found by the long fuzz run: M = math.maxinteger passed the check and looped for ever)
    local o = ls.oscillator(6)
    local s = ls.perturb(o.number, o.x ^ 2, {order = 4})
    for _, LM in ipairs{{1, math.maxinteger}, {math.maxinteger, 1}, {3, 2}, {-1, 2}} do
      local ok, e = pcall(s.pade, s, 1, 0.1, LM[1], LM[2])
      assert.is_false(ok)
      assert.truthy(tostring(e):find("need integers L, M >= 0 with L + M <= 4", 1, true), e)
    end
    assert.is_true(math.abs(s:pade(1, 0.1, 2, 2) - s:at(1, 0.1)) < 1e-3)
  end)

  it("one allocation above the dense cap is refused and says so", function()
    errs("above the dense cap", function() return ls.basis(2 ^ 31) end)
    errs("raise it with ls.config{dense_cap = bytes}", function() return ls.basis(2 ^ 31) end)
  end)

  it("padding: a product reaching past the padded levels, and pad 0", function()
    local o = ls.oscillator(10, { pad = 1 })
    errs("operator product reaches beyond the padding of the truncated basis", function() return o.x ^ 4 end)
    errs("build the basis with a larger pad", function() return o.x ^ 4 end)
    errs("bad argument #2 to 'oscillator' (pad must be between 1 and 100000", function() return ls.oscillator(10, { pad = 0 }) end)
  end)

  it("closed objects", function()
    local m = ls.matrix { { 1 } }
    m:close()
    errs("calling 'get' on bad self (attempt to use a closed matrix)", function() return m:get(1, 1) end)
    errs("bad argument #1 to 'eigen' (attempt to use a closed matrix)", function() return ls.eigen(m) end)
    local B = ls.spin(1)
    B:close()
    errs("attempt to use a closed basis", function() return B:dim() end)
  end)

  it("spins, orders and options", function()
    errs("bad argument #1 to 'spin' (S must be a positive multiple of 1/2", function() return ls.spin(0.3) end)
    local H0, V = ls.matrix { { 0, 0 }, { 0, 1 } }, ls.matrix { { 0, 1 }, { 1, 0 } }
    errs("bad argument #3 to 'perturb' (order must be from 1 to 1000, got 0)", function() return ls.perturb(H0, V, { order = 0 }) end)
    errs("unknown option 'nosuch' (accepted:", function() return ls.eigen(H0, { nosuch = 1 }) end)
  end)

  it("effective Hamiltonians: every error the manual lists", function()
    local H0, V = ls.matrix { { 0, 0 }, { 0, 1 } }, ls.matrix { { 0, 1 }, { 1, 0 } }
    errs("(the group of levels is empty)", function() return ls.effective(H0, V, { levels = {} }) end)
    errs("no level of H0 in the window [5.0, 6.0]", function() return ls.effective(H0, V, { window = { 5, 6 } }) end)
    errs("(level 3 is out of range 1..2)", function() return ls.effective(H0, V, { levels = { 3 } }) end)
    errs("(level 1 is given twice)", function() return ls.effective(H0, V, { levels = { 1, 1 } }) end)
    errs("the group cuts through a degenerate level of H0 (E = 0): level 2 must come along with level 1", function() return ls.effective(ls.matrix { { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 1 } },
      ls.matrix { { 0, 1, 0 }, { 1, 0, 0 }, { 0, 0, 0 } }, { levels = { 1 } }) end)
    errs("bad argument #2 to 'effective' (V must be 2x2 like H0, got 3x3)", function() return ls.effective(H0,
      ls.matrix { { 0, 1, 0 }, { 1, 0, 0 }, { 0, 0, 0 } }, { levels = { 1 } }) end)
    errs("bad argument #2 to 'effective' (V is not Hermitian", function() return ls.effective(H0, ls.matrix { { 0, 1 }, { 2, 0 } },
      { levels = { 1 } }) end)
    errs("(order must be from 1 to 50, got 51)", function() return ls.effective(H0, V, { levels = { 1 }, order = 51 }) end)
  end)

  it("transitions: from, t0/t1, a pulse that returns NaN or raises", function()
    local s = ls.spin(0.5)
    local g = ls.pulse.gaussian { amplitude = 0.1, center = 0, width = 1 }
    errs("bad argument #1 to 'transition' (from = 3 is out of range 1..2)", function() return ls.transition({ H0 = s.Sz, V = s.Sx, pulse = g, from = 3, t0 = -4, t1 = 4 }) end)
    errs("t1 (-4) must exceed t0 (4)", function() return ls.transition({ H0 = s.Sz, V = s.Sx, pulse = g, from = 1, t0 = 4, t1 = -4 }) end)
    errs("the pulse function returned NaN at t = -4", function() return ls.transition({ H0 = s.Sz, V = s.Sx, pulse = function() return 0 / 0 end, from = 1, t0 = -4, t1 = 4 }) end)
    errs("the pulse function failed at t = -4", function() return ls.transition({ H0 = s.Sz, V = s.Sx, pulse = function() error("my pulse broke") end, from = 1, t0 = -4, t1 = 4 }) end)
  end)

  it("box potentials: NaN, non-numbers and errors from f", function()
    local B = ls.box(4)
    errs("potential: the function returned NaN at x =", function() return B:potential(function() return 0 / 0 end) end)
    errs("(number expected)", function() return B:potential(function() return "a" end) end)
    errs("potential: the function failed at x =", function() return B:potential(function() error("bad V") end) end)
  end)

  it("Clebsch-Gordan arguments", function()
    errs("bad argument #1 to 'clebsch' (j1 must be non-negative", function() return ls.clebsch(-1, 0, 1, 0, 1, 0) end)
    errs("bad argument #2 to 'clebsch' (|m1| = 2.0 exceeds j1 = 1.0)", function() return ls.clebsch(1, 2, 1, 0, 1, 0) end)
    errs("j1 + m1 must be an integer", function() return ls.clebsch(1, 0.5, 1, 0, 1, 0) end)
  end)

  it("units and recipes list the accepted names", function()
    errs("cannot convert energy 'eV' to length 'm'", function() return ls.units.convert(1, "eV", "m") end)
    errs("unknown unit 'furlong'; accepted: energy: hartree", function() return ls.units.convert(1, "eV", "furlong") end)
    errs("bad argument #1 to 'recipe' (unknown recipe 'nosuch'; known: ", function() return ls.recipe("nosuch") end)
    errs("unknown parameter 'nosuch' (accepted: ", function() return ls.recipe("linear_force", { nosuch = 1 }) end)
    errs("recipe 'zeeman': parameter 'spin' must be a multiple of 1/2 (got 0.3)",
      function() return ls.recipe("zeeman", { spin = 0.3 }) end)
  end)

  it("files: an unwritable path names the file and the reason", function()
    local sw = ls.sweep { H0 = ls.matrix { { 0, 0.1 }, { 0.1, 0 } }, V = ls.matrix { { 1, 0 }, { 0, -1 } },
      from = -1, to = 1, steps = 4 }
    errs("cannot write '/nonexistent-dir-lvs/x.csv' (opening a temporary file beside it: No such file or directory)",
      function() return sw:write("/nonexistent-dir-lvs/x.csv") end)
    errs("bad argument #1 to 'plot' (a path ending in .svg or .png expected)", function() return sw:plot("x.pdf") end)
  end)

  it("warnings the manual lists appear where it says", function()
    -- invented models, each built to trip one warning (common practice)
    local H0 = ls.matrix { { 0, 0, 0 }, { 0, 1e-9, 0 }, { 0, 0, 1 } }
    local V = ls.matrix { { 0, 1, 0.5 }, { 1, 0, 0.5 }, { 0.5, 0.5, 0 } }
    -- levels 1 and 2 (gap 1e-9, coupling 1) form a model space by default;
    -- kept apart by groups = "exact" they draw the warnings
    local s = ls.perturb(H0, V, { order = 3, degen_tol = 1e-12, groups = "exact" })
    assert.truthy(tostring(s):find("level 1: level 2 is 1e-09 away, coupled by 1, left outside a model space" ..
      " (groups = \"exact\"): the series is unreliable at lambda = 1", 1, true), tostring(s))
    assert.truthy(s:check(0.1).levels[1].warning:find("level 2 is 1e-09 away, coupled by 1: the gap is below 4 x " ..
      "|lambda| x coupling = 0.4: series unreliable; it was left outside a model space because groups = \"exact\"",
      1, true), s:check(0.1).levels[1].warning)
    local sa = ls.perturb(H0, V, { order = 3, degen_tol = 1e-12 })
    assert.equal("near", sa:groups()[1].kind)
    assert.is_nil(sa:check(0.1).levels[1].warning)
    -- a model space's member is judged by its distance to the levels outside
    local sh = ls.perturb(H0, V, { order = 3, degen_tol = 1e-12, groups = { { 1, 2 } } })
    assert.truthy(sh:check(2).levels[1].warning:find("below |lambda|*||V|| = 3: series unreliable", 1, true))
    local o = ls.oscillator(30)
    local _, note = ls.perturb(o.number + 0.5, o.x ^ 4, { order = 12, levels = { 1 } }):radius(1)
    assert.truthy(note:find("ratios still falling (radius may be smaller still, or 0)", 1, true), note)
    local h = ls.effective(ls.matrix { { 0, 0, 0 }, { 0, 0, 0 }, { 0, 0, 1 } },
      ls.matrix { { 0, 0, 1 }, { 0, 0, 1 }, { 1, 1, 0 } }, { levels = { 1, 2 }, order = 2 })
    assert.truthy(h:warnings()[1]:find("is not large compared with the coupling max|V_am| = 1", 1, true))
    local sp = ls.spin(0.5)
    local tr = ls.transition { H0 = sp.Sz, V = sp.Sx, from = 1, t0 = -6, t1 = 6,
      pulse = ls.pulse.gaussian { amplitude = 2, center = 0, width = 1 } }
    assert.truthy(tr:warnings():find("first-order probability exceeds 0.1", 1, true))
    assert.truthy(tr:exact():warnings():find("perturbation theory and exact propagation disagree (level 2:", 1, true))
    local _, info = ls.golden_rule { V = 0.01, band = { 0, 1, 2, 3 }, E = 10, broadening = 0.1 }
    for _, w in ipairs { "is below the mean level spacing 1: the band does not act as a continuum",
      "the final energy lies outside the band", "longer than the recurrence time" } do
      assert.truthy(info.warning:find(w, 1, true), w)
    end
    _, info = ls.golden_rule { V = 1, band = { 0, 0.1, 0.2, 0.3 }, E = 0.15, broadening = 0.2 }
    assert.truthy(info.warning:find("is not small against the band width 0.3: the golden rule is unreliable", 1, true))
  end)

  it("the program: name=value arguments, script errors, a missing gnuplot", function()
    local out = run(bin .. " -e 'print(1)' novalue")
    assert.truthy(out:find("levelshift: argument 'novalue' is not of the form name=value", 1, true), out)
    out = run(bin .. " -e 'error(\"kaput\")'")
    assert.truthy(out:find("levelshift: (command line):1: kaput", 1, true), out)
    assert.truthy(out:find("stack traceback", 1, true) and out:find("rc=1", 1, true), out)
    -- without gnuplot on PATH, plot says which package to install
    out = run("PATH=/nonexistent " .. bin .. " -e 'local sw = ls.sweep{H0 = ls.matrix{{0, 0.1}, {0.1, 0}}, "
      .. "V = ls.matrix{{1, 0}, {0, -1}}, from = -1, to = 1, steps = 4}; sw:plot(\"/nonexistent-dir-lvs/x.svg\")'")
    assert.truthy(out:find("gnuplot is not installed; install the Debian package gnuplot-nox", 1, true), out)
  end)
end)
