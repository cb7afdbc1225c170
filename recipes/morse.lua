-- morse: a Morse oscillator on the harmonic-oscillator states of its own
-- frequency, the potential as a function of the position operator.
return {
  about = "Morse oscillator p^2/2 + D (1 - exp(-a x))^2 on harmonic states: H0 = omega (n + 1/2), V = the rest",
  doc = [[
H = p^2/2 + D (1 - exp(-a x))^2            (hbar = mass = 1)
  = omega (n + 1/2)  +  [D (1 - exp(-a x))^2 - omega^2 x^2 / 2],
omega = a sqrt(2 D): H0 is the harmonic oscillator of the well's curvature and V
everything else (cubic, quartic, ... terms of the potential). V is made with
x:fn(f) (the spectral theorem on the padded position operator: exact matrix
elements inside the kept levels up to the padding), so no Taylor series of
the exponential is cut. Exact bound levels (Morse, Phys. Rev. 34, 57 (1929);
Landau & Lifshitz, Quantum Mechanics, section 23, problem 4):
  E_n = omega (n + 1/2) - omega^2 (n + 1/2)^2 / (4 D),  0 <= n < sqrt(2 D)/a - 1/2,
so the anharmonic constant omega x_e = omega^2/(4 D) = a^2/2; model.level_exact(n)
gives E_n, model.bound the number of bound levels. In the series, the cubic
term at second order and the quartic at first give -a^2/2 (n + 1/2)^2 + ... (the
Dunham expansion, Phys. Rev. 41, 721 (1932)); the higher terms of V add
corrections of higher order in a. Check by ls.eigen(H0 + V) or model.exact(k).]],
  params = {
    { name = "D", default = 10, invented = true, unit = "energy (hbar = mass = 1)", about = "well depth", positive = true },
    { name = "a", default = 0.5, invented = true, unit = "1/length", about = "range parameter", positive = true },
    { name = "levels", default = 40, unit = "", about = "harmonic states kept", integer = true, min = 4, max = 2000 },
    { name = "pad", default = 60, unit = "", about = "extra harmonic states behind the kept ones for x:fn",
      integer = true, min = 1, max = 5000 },
  },
  build = function(ls, p)
    local w = p.a * math.sqrt(2 * p.D)
    local o = ls.oscillator(p.levels, { pad = p.pad })
    local s = 1 / math.sqrt(w) -- x = s X for X = (b + b^+)/sqrt(2) of frequency omega
    local H0 = w * (o.number + 0.5)
    local V = o.x:fn(function(X)
      local x = s * X
      return p.D * (1 - math.exp(-p.a * x)) ^ 2 - 0.5 * w * w * x * x
    end)
    local bound = math.floor(math.sqrt(2 * p.D) / p.a - 0.5) + 1
    if math.sqrt(2 * p.D) / p.a - 0.5 == bound - 1 then bound = bound - 1 end
    local model = { basis = o, H0 = H0, V = V, omega = w, bound = bound }
    function model.level_exact(n)
      if math.type(n) ~= "integer" or n < 0 or n >= bound then
        error("level_exact: n must be an integer from 0 to " .. (bound - 1) .. " (the bound levels)", 2)
      end
      return w * (n + 0.5) - (w * (n + 0.5)) ^ 2 / (4 * p.D)
    end
    function model.exact(k) return ls.eigen(H0 + V, { count = k or 4, vectors = false }) end
    return model
  end,
}
