-- The anharmonic oscillator p^2/2 + x^2/2 + g x^4 built by index.
local g = (params and params.g) or 0.1
local o = ls.oscillator(80)
local H = o.number + 0.5 + g * o.x ^ 4
local E = ls.eigen(H, { count = 4, vectors = false })
for k, e in ipairs(E) do print(string.format("E%d = %.12f", k - 1, e)) end
