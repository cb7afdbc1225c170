-- Calls of the library from inside its own callbacks (a sweep inside a
-- sweep's family function, a series inside a pulse, a sweep inside V(t),
-- a transition inside a family) work and give the numbers of the same calls
-- made one after the other (common practice: re-entrant calls must not
-- share state). The sanitizer build runs these too.
local ls = require "levelshift"

local o = ls.oscillator(10)
local H0, V = o.number + 0.5, o.x ^ 2

local function levels(sw, count)
  local t = {}
  for k = 1, count do t[k] = sw:level(k) end
  return t
end

local function same(a, b)
  for k = 1, #a do
    for i = 1, #a[k] do assert.are.equal(a[k][i], b[k][i]) end
  end
end

describe("re-entrant calls", function()
  it("run a sweep inside a sweep's family function", function()
    local plain = ls.sweep{H = function(p) return H0 + p * V end, from = 0, to = 1, steps = 6, count = 3, progress = false}
    local inner_E
    local nested = ls.sweep{H = function(p)
      local inner = ls.sweep{H = function(q) return H0 + q * V end, from = 0, to = 0.5, steps = 3, count = 2,
        progress = false}
      inner_E = inner:level(1)[4]
      return H0 + p * V
    end, from = 0, to = 1, steps = 6, count = 3, progress = false}
    same(levels(plain, 3), levels(nested, 3))
    assert.are.equal(plain:level(1)[4], inner_E) -- p = 0.5 is the 4th point of both
  end)

  it("run a series inside a pulse function and a sweep inside V(t)", function()
    local pulse = function(t) return 0.02 * math.exp(-t * t) end
    local a = ls.transition{H0 = H0, V = o.x, pulse = pulse, from = 1, t0 = -4, t1 = 4, order = 2}
    local b = ls.transition{H0 = H0, V = o.x, pulse = function(t)
      local s = ls.perturb(H0, V, {order = 2, levels = {1}})
      assert(s:energy(1, 0) == 0.5)
      return pulse(t)
    end, from = 1, t0 = -4, t1 = 4, order = 2}
    assert.are.equal(a:probability(2), b:probability(2))
    local c = ls.transition{H0 = H0, V = function(t)
      local sw = ls.sweep{H0 = H0, V = V, from = 0, to = 0.1, steps = 2, count = 2, progress = false}
      assert(#sw:level(1) == 3)
      return pulse(t) * o.x
    end, from = 1, t0 = -4, t1 = 4, order = 2}
    assert.is_true(math.abs(c:probability(2) - a:probability(2)) <= 1e-9 * a:probability(2))
  end)
end)
