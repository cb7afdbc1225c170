-- ls.random_orthogonal: Haar-distributed orthogonal matrices by QR of a
-- Gaussian matrix with R's diagonal signs moved into Q (F. Mezzadri,
-- Notices of the AMS 54, 592 (2007), section 5).
local ls = require "levelshift"

describe("random orthogonal matrices", function()
  it("are orthogonal to rounding and reproducible from their seed", function()
    local Q = ls.random_orthogonal(50, { seed = 7 })
    local P = Q:adj() * Q
    local worst = 0
    for i = 1, 50 do
      for j = 1, 50 do worst = math.max(worst, math.abs(P:get(i, j) - (i == j and 1 or 0))) end
    end
    assert.is_true(worst < 1e-13)
    local R = ls.random_orthogonal(50, { seed = 7 })
    local S = ls.random_orthogonal(50, { seed = 8 })
    assert.are.equal(Q:get(3, 5), R:get(3, 5))
    assert.are_not.equal(Q:get(3, 5), S:get(3, 5))
    assert.are.equal(1, ls.random_orthogonal(1):get(1, 1) ^ 2)
  end)

  -- Haar measure is invariant under flipping the sign of a column, so
  -- E[Q11] = 0 and E[Q11 Q22] = 0, hence E[(tr Q)^2] = n E[Q11^2] = 1
  -- (common practice; the trace moments of Haar O(n) match the standard
  -- normal's: P. Diaconis and M. Shahshahani, J. Appl. Probab. 31A, 49
  -- (1994)). Without the sign fix Q11 = -|G11| / |G e1| < 0 always, so the
  -- mean of Q11 catches a missing fix. 20000 matrices of order 4, fixed
  -- seeds; the bounds are five standard errors.
  it("have the moments of Haar measure", function()
    local N, n = 20000, 4
    local s1, s2 = 0, 0
    for k = 1, N do
      local Q = ls.random_orthogonal(n, { seed = k })
      local t = Q:trace()
      s1 = s1 + Q:get(1, 1)
      s2 = s2 + t * t
    end
    assert.is_true(math.abs(s1 / N) < 5 * math.sqrt(1 / n / N))
    assert.is_true(math.abs(s2 / N - 1) < 5 * math.sqrt(2 / N))
  end)

  -- A similarity transform keeps the spectrum (common practice): the
  -- padded oscillator's number operator rotated by Q has eigenvalues
  -- 0, 1, ..., n - 1 (+ 1/2), and the dense product with a padded operator
  -- matches the one with its plain visible block.
  it("rotate padded operators into a dense basis with the spectrum kept", function()
    local n = 30
    local Q = ls.random_orthogonal(n, { seed = 11 })
    local o = ls.oscillator(n)
    local H = Q:adj() * ((o.number + 0.5) * Q)
    local w = ls.eigen(H)
    for k = 1, n do assert.is_true(math.abs(w[k] - (k - 0.5)) < 1e-12) end
    local X4 = o.x ^ 4
    local plain = ls.zeros(n, n)
    for i = 1, n do
      for j = 1, n do plain:set(i, j, (X4:get(i, j))) end
    end
    local A, B = Q:adj() * (X4 * Q), Q:adj() * (plain * Q)
    local worst = 0
    for i = 1, n do
      for j = 1, n do worst = math.max(worst, math.abs(A:get(i, j) - B:get(i, j))) end
    end
    assert.is_true(worst < 1e-9 * 3 * n * n)
  end)

  it("names bad arguments", function()
    assert.error_matches(function() ls.random_orthogonal(0) end, "dimension must be at least 1", 1, true)
    assert.error_matches(function() ls.random_orthogonal(2.5) end, "dimension must be an integer", 1, true)
    assert.error_matches(function() ls.random_orthogonal(3, { seed = -1 }) end, "seed must be a non-negative integer", 1, true)
    assert.error_matches(function() ls.random_orthogonal(3, { sead = 1 }) end, "unknown option 'sead'", 1, true)
    assert.error_matches(function() ls.random_orthogonal(2 ^ 40) end, "random_orthogonal", 1, true)
  end)
end)
