-- Requests that cannot fit in memory or in the dense cap are refused before
-- any work that grows faster than their input: each constructor and solver
-- at an absurd size returns an error at once (common practice: check sizes
-- before allocating). The clock bound is a guard against runs of hours
-- (several seconds of slack on a loaded machine), not a speed test.
local ls = require "levelshift"

local GUARD = 5 -- seconds

local function refused(what, f, pattern)
  local t0 = ls.clock()
  local ok, e = pcall(f)
  local dt = ls.clock() - t0
  assert.is_false(ok, what .. " was not refused")
  assert.is_string(e, what)
  if pattern then assert.truthy(e:find(pattern, 1, true), what .. ": " .. e) end
  assert.is_true(dt < GUARD, string.format("%s took %.2f s to be refused", what, dt))
end

describe("absurd sizes", function()
  it("constructors refuse them at once", function()
    refused("oscillator(1e12)", function() return ls.oscillator(1e12) end)
    refused("oscillator(2^40)", function() return ls.oscillator(1 << 40) end)
    refused("spin(1e9)", function() return ls.spin(1e9) end)
    refused("basis(2^40)", function() return ls.basis(1 << 40) end)
    refused("zeros(2^40)", function() return ls.zeros(1 << 40, 1 << 40) end)
    refused("box(2^40)", function() return ls.box(1 << 40) end)
    refused("rotor(1e9)", function() return ls.rotor(1e9) end)
    refused("radial(2^40)", function() return ls.radial(1 << 40) end)
    refused("random_orthogonal(1e6)", function() return ls.random_orthogonal(1000000) end, "dense cap")
    refused("product of 64 spins", function() return ls.product(ls.spin(0.5), 64) end)
    refused("coulomb_basis with nmax 1e6", function() return ls.coulomb_basis{nmax = 1000000} end)
  end)

  it("ops of huge product bases are refused when made or when written out", function()
    -- 2^36 states: past the 2^32 rows of sparse storage, so refused at once
    local P = ls.product(ls.spin(0.5), 36)
    refused("a site op of 2^36 states", function() return P:site(1).Sz end, "above the limit")
    -- 2^30 states: the op is held as a site sum; written out, its 2^30 + 1
    -- column starts alone pass the 4 GiB dense cap
    local Q = ls.product(ls.spin(0.5), 30)
    local H = Q:site(1).Sz * Q:site(2).Sz + Q:site(3).Sx
    refused("eigen of a 2^30-state op", function() return ls.eigen(H, {count = 1, vectors = false}) end,
      "writing out the operator")
    refused("get of a 2^30-state op", function() return H:get(1, 1) end, "above the dense cap")
  end)

  it("solvers refuse impossible requests before any work", function()
    local o = ls.oscillator(2000000)
    refused("eigen vectors of 2e6 states", function() return ls.eigen(o.x) end, "dense cap")
    refused("dense eigen of 2e6 states", function() return ls.eigen(o.x * o.x, {method = "dense"}) end, "dense cap")
    local small = ls.oscillator(8)
    refused("sweep with 1e12 steps", function()
      return ls.sweep{H0 = small.number, V = small.x, from = 0, to = 1, steps = 1e12, count = 2, progress = false}
    end)
    refused("perturb to order 1e9", function() return ls.perturb(small.number, small.x, {order = 1000000000}) end)
    refused("transition with 2^40 steps (the message says so)", function()
      return ls.transition{H0 = small.number, V = small.x, pulse = ls.pulse.gaussian{amplitude = 0.1, center = 0,
        width = 1}, from = 1, t0 = -3, t1 = 3, steps = 1 << 40}
    end, "got 1099511627776")
    refused("effective of order 1e9", function()
      return ls.effective(small.number, small.x, {levels = {1, 2}, order = 1000000000})
    end)
  end)
end)
