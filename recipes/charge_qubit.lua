-- charge_qubit: a Cooper-pair box / transmon in the charge basis, optionally
-- coupled to a resonator mode.
return {
  about = "superconducting charge qubit 4 E_C (n - n_g)^2 - E_J cos(phi) in the charge basis, "
    .. "split for small E_J (regime=charge) or as a weakly anharmonic oscillator (regime=transmon)",
  doc = [[
H = 4 E_C (n - n_g)^2 - E_J cos(phi)   on the charge states n = -N..N
    (ls.charge(N): <n+-1|cos(phi)|n> = 1/2; Bouchiat et al., Phys. Scr. T76,
    165 (1998); Koch et al., Phys. Rev. A 76, 042319 (2007), eq. (2.1)).
Exact levels: Mathieu characteristic values, E_m = E_C a_{2(n_g + k)}(-E_J/(2 E_C))
(Koch et al. 2007, eq. (2.4)); at n_g = 0: E_0 = E_C a_0(q), E_1 = E_C b_2(q),
E_2 = E_C a_2(q) with q = E_J/(2 E_C).

regime = "charge" (E_J << E_C):  H0 = 4 E_C (n - n_g)^2 (diagonal), V = -E_J cos(phi).
  At n_g = 1/2 the charge states n = 0 and n = 1 are degenerate: the series
  takes them together and splits them by E_J at first order (the charge
  qubit's sweet spot); elsewhere each charge state shifts by
  (E_J/2)^2 [1/(E(n) - E(n-1)) + 1/(E(n) - E(n+1))] at second order.
regime = "transmon" (E_J >> E_C): the phase stays small and
  H = sqrt(8 E_J E_C) (b^+ b + 1/2) - E_J - (E_C/12)(b + b^+)^4 + O(phi^6)
  (Koch et al. 2007, eqs. (2.9)-(2.11)); H0 = the oscillator, V = the quartic
  term, on an oscillator of `levels` states (the charge dispersion, of order
  exp(-sqrt(8 E_J/E_C)), is not in it). First order: E_01 = sqrt(8 E_J E_C) - E_C,
  anharmonicity E_12 - E_01 = -E_C.
With photons > 0, a resonator mode omega_r a^+ a and the coupling
coupling * n (a + a^+) (Koch et al. 2007, eq. (3.1)) are added: the coupling
goes into V, the mode into H0, in the product basis (qubit first, then the
mode; labels n1 and n2). model.exact(k) diagonalizes the full charge-basis
Hamiltonian (H0 + V of regime = charge, with the resonator when present) and
gives its k lowest levels, the check for either regime; model.sweet_spot_gap()
returns E_J, the first-order splitting at n_g = 1/2.
Energies in any one unit (E_C, E_J, omega_r, coupling in the same; GHz by
habit: the defaults are an invented device, not a measured one).]],
  params = {
    { name = "E_C", default = 0.3, invented = true, unit = "energy", about = "charging energy", positive = true },
    { name = "E_J", default = 0.05, invented = true, unit = "energy", about = "Josephson energy", nonnegative = true },
    { name = "n_g", default = 0.5, unit = "", about = "offset charge (in Cooper pairs; sweep it)" },
    { name = "N", default = 10, unit = "", about = "charge states kept: n = -N..N", integer = true, min = 1, max = 10000 },
    { name = "regime", default = "charge", about = "charge (V = Josephson term) or transmon (V = quartic term)",
      choices = { "charge", "transmon" } },
    { name = "levels", default = 30, unit = "", about = "oscillator states of regime = transmon", integer = true,
      min = 4, max = 2000 },
    { name = "photons", default = 0, unit = "", about = "resonator states kept (0: no resonator)", integer = true,
      min = 0, max = 2000 },
    { name = "omega_r", default = 6, invented = true, unit = "energy", about = "resonator frequency", positive = true },
    { name = "coupling", default = 0.05, invented = true, unit = "energy", about = "coupling g of g n (a + a^+)" },
  },
  build = function(ls, p)
    local charge_H0, charge_V, charge_n, basis
    local C = ls.charge(p.N)
    local function qubit_ops(site)
      local n, n2, cos = site.n, site.n2, site.cos
      -- 4 E_C (n - n_g)^2 = 4 E_C (n^2 - 2 n_g n + n_g^2)
      return 4 * p.E_C * (n2 - 2 * p.n_g * n) + 4 * p.E_C * p.n_g ^ 2, -p.E_J * cos, n
    end
    local model = {}
    if p.photons > 0 then
      basis = ls.product(C, ls.oscillator(p.photons))
      local q, m = basis:site(1), basis:site(2)
      charge_H0, charge_V, charge_n = qubit_ops(q)
      local mode = p.omega_r * m.number
      local cpl = p.coupling * (charge_n * (m.lower + m.raise))
      charge_H0 = charge_H0 + mode
      charge_V = charge_V + cpl
      model.mode = m
    else
      basis = C
      charge_H0, charge_V, charge_n = qubit_ops(C)
    end
    model.basis, model.charge, model.n = basis, C, charge_n
    local exact_H = charge_H0 + charge_V
    function model.exact(k)
      if k ~= nil and (math.type(k) ~= "integer" or k < 1) then
        error("exact: level count must be a positive integer", 2)
      end
      return ls.eigen(exact_H, { count = k or 4, vectors = false })
    end
    function model.sweet_spot_gap() return p.E_J end
    if p.regime == "charge" then
      model.H0, model.V = charge_H0, charge_V
    else
      if p.E_J <= 0 then error("regime = transmon needs E_J > 0", 2) end
      local o = ls.oscillator(p.levels)
      local wp = math.sqrt(8 * p.E_J * p.E_C)
      model.plasma = wp
      -- (b + b^+) = sqrt(2) x for our x = (a + a^+)/sqrt(2): (b + b^+)^4 = 4 x^4
      model.oscillator = o
      model.H0 = wp * (o.number + 0.5) - p.E_J
      model.V = -(p.E_C / 3) * o.x ^ 4
      if p.photons > 0 then
        error("regime = transmon takes no resonator here (photons = 0); use regime = charge with the resonator", 2)
      end
    end
    return model
  end,
}
