-- Quartic oscillator p^2/2 + x^2/2 + lambda x^4: ground-state RS series,
-- Pade resummation and a check against exact diagonalization.
local ls = require "levelshift"
local B = ls.oscillator(80)
local H0 = B:diag(function(l) return l.n + 0.5 end)
local s = ls.perturb(H0, B.x ^ 4, { order = 12, levels = { 1, 2 } })
print(s)
local lambda = 0.02
print(string.format("lambda = %g: partial sum %.12f, Pade [6/6] %.12f", lambda, s:at(1, lambda), s:pade(1, lambda, 6, 6)))
for _, row in ipairs(s:check(lambda).levels) do
  print(string.format("level %d: series %.12f exact %.12f error %.2e", row.level, row.series, row.exact, row.error))
end
print("ratio-test radius:", s:radius(1))
