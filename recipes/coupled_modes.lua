-- coupled_modes: two oscillators with a bilinear position coupling.
return {
  about = "two oscillator modes coupled by coupling * x1 x2",
  doc = [[
H0 = omega1 (n1 + 1/2) + omega2 (n2 + 1/2)
V  = coupling x1 x2,    x_i = (a_i + a_i^+) / sqrt(2 omega_i)
(hbar = mass = 1; energies in the units of the omegas; basis: n1, n2 from 0
to levels-1, labels n1, n2.)

Exact: the quadratic form has normal-mode frequencies
  Omega^2 = (omega1^2 + omega2^2)/2 -/+ sqrt(((omega1^2 - omega2^2)/2)^2 + coupling^2)
(common practice: diagonalize the potential matrix), stable only for
coupling^2 < omega1^2 omega2^2; the ground energy is (Omega_- + Omega_+)/2,
model.normal_modes() returns {Omega_-, Omega_+}. Second order for the ground
state: E2 = -coupling^2 / (4 omega1 omega2 (omega1 + omega2)).
With omega1 = omega2 the levels of H0 are degenerate; ls.perturb groups them.
Truncation: levels near n = levels-1 miss their upper partners.]],
  params = {
    { name = "omega1", default = 1, unit = "energy (hbar = 1)", about = "frequency of mode 1", positive = true },
    { name = "omega2", default = 1.3, invented = true, unit = "energy (hbar = 1)", about = "frequency of mode 2", positive = true },
    { name = "coupling", default = 0.1, invented = true, unit = "energy^2 (mass = 1)", about = "coefficient of x1 x2" },
    { name = "levels", default = 12, unit = "", about = "states kept per mode", integer = true, min = 2, max = 200 },
  },
  check = function(p)
    if p.coupling ^ 2 >= (p.omega1 * p.omega2) ^ 2 then
      error(string.format("coupling^2 = %.6g must be below (omega1 omega2)^2 = %.6g: the potential is unbounded below",
        p.coupling ^ 2, (p.omega1 * p.omega2) ^ 2), 0)
    end
  end,
  build = function(ls, p)
    local P = ls.product(ls.oscillator(p.levels), ls.oscillator(p.levels))
    local a, b = P:site(1), P:site(2)
    local x1, x2 = a.x / math.sqrt(p.omega1), b.x / math.sqrt(p.omega2)
    local H0 = p.omega1 * (a.number + 0.5) + p.omega2 * (b.number + 0.5)
    local V = p.coupling * (x1 * x2)
    local function normal_modes()
      local m = (p.omega1 ^ 2 + p.omega2 ^ 2) / 2
      local r = math.sqrt(((p.omega1 ^ 2 - p.omega2 ^ 2) / 2) ^ 2 + p.coupling ^ 2)
      return { math.sqrt(m - r), math.sqrt(m + r) }
    end
    return { basis = P, H0 = H0, V = V, x1 = x1, x2 = x2, normal_modes = normal_modes }
  end,
}
