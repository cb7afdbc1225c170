-- hyperfine: an electron spin 1/2 coupled to a nucleus of spin I, in a field.
local ENERGY = { "MHz", "GHz", "kHz", "Hz", "cm^-1", "eV", "meV", "ueV", "hartree", "K", "mK" }
local FIELD = { "T", "mT", "uT", "G" }
return {
  about = "electron spin 1/2 + nuclear spin I: A S.I + Zeeman along z (Breit-Rabi)",
  doc = [[
H0 = hyperfine S.I                                   (S = 1/2)
V  = gfactor mu_B B Sz - nuclear_g mu_N B Iz         (field along z)

The nuclear term is -mu.B with mu = nuclear_g mu_N I. H = H0 + V is solved
in closed form by the Breit-Rabi formula (Breit & Rabi, Phys. Rev. 38, 2082
(1931)); H0 alone gives F = I +- 1/2 split by hyperfine (I + 1/2).
Defaults: the hydrogen 1s atom (hyperfine 1420.405751768 MHz, from memory;
nuclear_g = g_p = 5.5856946893 and gfactor = |g_e| from CODATA 2018).
Units: hyperfine and the energies in energy_unit; field in field_unit.
Basis: ls.product(ls.spin(1/2), ls.spin(nuclear_spin)), labels m1 (electron),
m2 (nucleus), each from +S down.]],
  params = {
    { name = "nuclear_spin", default = 0.5, unit = "hbar", about = "nuclear spin I", half_integer = true,
      positive = true, max = 20 },
    { name = "hyperfine", default = 1420.405751768, unit = "energy_unit", about = "isotropic hyperfine constant A" },
    { name = "field", default = 0.01, invented = true, unit = "field_unit", about = "field along z" },
    { name = "field_unit", default = "T", about = "unit of field", choices = FIELD },
    { name = "gfactor", default = 2.00231930436256, unit = "", about = "electron g factor (positive)" },
    { name = "nuclear_g", default = 5.5856946893, unit = "", about = "nuclear g factor" },
    { name = "energy_unit", default = "MHz", about = "unit of hyperfine and of the energies", choices = ENERGY },
  },
  build = function(ls, p)
    local P = ls.product(ls.spin(0.5), ls.spin(p.nuclear_spin))
    local S, I = P:site(1), P:site(2)
    local u = ls.units
    local muB = u.convert(p.field, p.field_unit, p.energy_unit)       -- mu_B B
    local muN = muB * (u.mu_N / u.mu_B)                                -- mu_N B
    local SI = S.Sz * I.Sz + 0.5 * (S.Sp * I.Sm + S.Sm * I.Sp)
    local H0 = p.hyperfine * SI
    local V = (p.gfactor * muB) * S.Sz - (p.nuclear_g * muN) * I.Sz
    return { basis = P, H0 = H0, V = V, units = p.energy_unit, electron = S, nucleus = I }
  end,
}
