-- linear_force: a harmonic oscillator pushed by a constant force.
return {
  about = "harmonic oscillator with a linear force g*x (exact: shift -g^2/(2 m omega^2))",
  doc = [[
H0 = p^2/(2 mass) + mass omega^2 x^2 / 2 = omega (n + 1/2)
V  = g x,   x = (a + a^+) / sqrt(2 mass omega)          (hbar = 1)

Units: hbar = 1; mass, omega and g in any consistent units (energies come
out in the units of omega). Basis: the lowest `levels` oscillator states
n = 0 .. levels-1 (matrix elements of x from the core, exact inside the
basis).

Exact result (completing the square): every level moves by
-g^2 / (2 mass omega^2); the Rayleigh-Schroedinger series ends at second
order (E1 = 0, E2 = -g^2/(2 mass omega^2), all higher orders 0) for levels
far enough from the basis edge (n + 2 < levels at second order).
model.exact(level) returns omega (level - 1/2) - g^2/(2 mass omega^2)
(level numbered from 1). Source: any quantum mechanics text, e.g.
Sakurai & Napolitano, Modern Quantum Mechanics, 2nd ed. (2011), the
chapter 5 problems (problem number from memory: 5.1).]],
  params = {
    { name = "g", default = 0.1, invented = true, unit = "energy/length", about = "constant force: V = g x" },
    { name = "mass", default = 1, unit = "mass", about = "oscillator mass", positive = true },
    { name = "omega", default = 1, unit = "1/time (= energy, hbar = 1)", about = "angular frequency", positive = true },
    { name = "levels", default = 40, unit = "", about = "oscillator states kept (n = 0 .. levels-1)",
      integer = true, min = 3, max = 5000 },
  },
  build = function(ls, p)
    local o = ls.oscillator(p.levels)
    local H0 = p.omega * (o.number + 0.5)
    local V = (p.g / math.sqrt(p.mass * p.omega)) * o.x
    local shift = -p.g ^ 2 / (2 * p.mass * p.omega ^ 2)
    return {
      basis = o, H0 = H0, V = V,
      x = o.x / math.sqrt(p.mass * p.omega),
      exact = function(level)
        level = ls.recipes._argint("exact", 1, level, 1)
        return p.omega * (level - 0.5) + shift
      end,
    }
  end,
}
