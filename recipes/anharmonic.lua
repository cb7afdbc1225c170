-- anharmonic: an oscillator with cubic and quartic terms.
return {
  about = "anharmonic oscillator: omega (n + 1/2) + cubic x^3 + quartic x^4",
  doc = [[
H0 = p^2/2 + omega^2 x^2/2 = omega (n + 1/2)
V  = cubic x^3 + quartic x^4,    x = (a + a^+) / sqrt(2 omega)
(hbar = mass = 1; energies in the units of omega.)

V is the perturbation (H = H0 + V). Matrix elements of x^3 and x^4 come from
the core's padded oscillator operators, exact inside the `levels` kept states.

Published series (omega = 1), level n:
  quartic: E1 = quartic (3/4)(2n^2 + 2n + 1),
           E2 = -quartic^2 (1/8)(34n^3 + 51n^2 + 59n + 21) (level-n form
           from memory; n = 0 gives the -21/8 below);
           ground state 1/2 + 3/4 g - 21/8 g^2 + 333/16 g^3 - 30885/128 g^4 ...
           (Bender & Wu, Phys. Rev. 184, 1231 (1969); the series diverges:
           zero radius of convergence)
  cubic:   E1 = 0, E2 = -cubic^2 (1/8)(30n^2 + 30n + 11)
           (Landau & Lifshitz, Quantum Mechanics, sec. 38, problem 3; section
           and problem numbers from memory)
With both terms the second order is the sum of the two (parity kills the
cross term). A cubic term alone has no ground state (x^3 unbounded below):
the truncated basis hides that, so trust only low orders there.]],
  params = {
    { name = "quartic", default = 0.1, invented = true, unit = "energy (omega units, x in oscillator units)",
      about = "coefficient of x^4" },
    { name = "cubic", default = 0, unit = "energy", about = "coefficient of x^3" },
    { name = "omega", default = 1, unit = "energy (hbar = 1)", about = "harmonic frequency", positive = true },
    { name = "levels", default = 60, unit = "", about = "oscillator states kept (n = 0 .. levels-1)",
      integer = true, min = 5, max = 5000 },
  },
  build = function(ls, p)
    local o = ls.oscillator(p.levels)
    local x = o.x / math.sqrt(p.omega)
    local H0 = p.omega * (o.number + 0.5)
    local V
    if p.cubic ~= 0 then V = p.cubic * x ^ 3 end
    if p.quartic ~= 0 then
      local q = p.quartic * x ^ 4
      V = V and (V + q) or q
    end
    V = V or 0 * o.x
    return { basis = o, H0 = H0, V = V, x = x, p = o.p * math.sqrt(p.omega) }
  end,
}
