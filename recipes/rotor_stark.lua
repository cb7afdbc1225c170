-- rotor_stark: a linear rigid rotor in a static electric field (Stark effect).
-- "arb": the old behaviour, B and mu*E as plain numbers in one energy unit
local B_UNITS = { "arb", "GHz", "MHz", "kHz", "Hz", "THz", "cm^-1", "cm-1", "m^-1", "eV", "meV", "ueV", "hartree", "K", "mK", "J" }
local MU_UNITS = { "arb", "D", "debye", "ea0", "au_dipole", "C*m" }
local E_UNITS = { "arb", "V/m", "V/cm", "kV/cm", "au_field" }
local OUT_UNITS = { "same", "GHz", "MHz", "kHz", "Hz", "THz", "cm^-1", "cm-1", "m^-1", "eV", "meV", "ueV", "hartree", "K", "mK", "J" }
return {
  about = "rigid rotor B J^2 in a field: V = -mu E cos(theta) (second-order Stark shifts)",
  doc = [[
H0 = B J^2,  E_J = B J(J+1), states |J M>, J = 0..Jmax        (hbar = 1)
V  = -mu E cos(theta)   (field along z; cos theta couples J <-> J +- 1, same M)

Units: laboratory units through B_unit (GHz, MHz, cm^-1 or any energy),
mu_unit (D = debye, ea0, C*m) and E_unit (V/m, V/cm, kV/cm, au_field); mu*E
is formed in SI and every energy (B, mu*E, the report) is given in energy_unit
("same" = the unit of B), with CODATA 2018 constants via ls.units
(1 D * 1 kV/cm / h = 0.50341 GHz = 0.016792 cm^-1). The default "arb" for all
three keeps the old form: B and mu*E plain numbers in one energy unit, mu E
their product. Give laboratory units for all three or for none.
Basis: ls.rotor(Jmax) with every M, or the states of one M (M = "all" or an
integer). cos theta elements from Clebsch-Gordan coefficients in the core.

Second-order shifts (Townes & Schawlow, Microwave Spectroscopy, 1955, ch. 10):
  E2(J, M) = (mu E)^2/(2B) [J(J+1) - 3M^2] / [J(J+1)(2J-1)(2J+3)]   (J > 0)
  E2(0, 0) = -(mu E)^2/(6B)
First order vanishes; +M and -M stay degenerate at every order.
model.e2(J, M) returns the formula; exact for J < Jmax - 1 at second order.
model.B and model.muE are B and mu*E in energy_unit (model.units).]],
  params = {
    { name = "B", default = 1, unit = "B_unit", about = "rotational constant", positive = true },
    { name = "mu", default = 1, unit = "mu_unit", about = "dipole moment" },
    { name = "E", default = 0.2, invented = true, unit = "E_unit", about = "static field along z" },
    { name = "B_unit", default = "arb", about = "unit of B (arb: B and mu*E in one energy unit)", choices = B_UNITS },
    { name = "mu_unit", default = "arb", about = "unit of mu (arb: see B_unit)", choices = MU_UNITS },
    { name = "E_unit", default = "arb", about = "unit of E (arb: see B_unit)", choices = E_UNITS },
    { name = "energy_unit", default = "same", about = "unit of the energies (same: the unit of B)", choices = OUT_UNITS },
    { name = "Jmax", default = 12, unit = "", about = "largest J kept", integer = true, min = 1, max = 200 },
    { name = "M", default = "all", unit = "", about = "\"all\", or one integer M (|M| <= Jmax)" },
  },
  check = function(p)
    local arb = (p.B_unit == "arb" and 1 or 0) + (p.mu_unit == "arb" and 1 or 0) + (p.E_unit == "arb" and 1 or 0)
    if arb == 1 or arb == 2 then
      error(string.format("parameters 'B_unit', 'mu_unit', 'E_unit' must be all \"arb\" or all laboratory units, " ..
        "got B_unit = %s, mu_unit = %s, E_unit = %s", p.B_unit, p.mu_unit, p.E_unit), 0)
    end
    if arb == 3 and p.energy_unit ~= "same" then
      error("parameter 'energy_unit' = " .. p.energy_unit .. " needs laboratory units for B, mu and E " ..
        "(B_unit, mu_unit, E_unit); with \"arb\" it must be \"same\"", 0)
    end
    if p.energy_unit == "same" and arb == 0 then p.energy_unit = p.B_unit end -- the report shows the unit used
    if p.M ~= "all" then
      local m = math.tointeger(tonumber(p.M))
      if not m then error("parameter 'M' must be \"all\" or an integer, got " .. tostring(p.M), 0) end
      if math.abs(m) > p.Jmax then
        error(string.format("parameter 'M' = %d needs |M| <= Jmax = %d", m, p.Jmax), 0)
      end
    end
  end,
  build = function(ls, p)
    local R = p.M == "all" and ls.rotor(p.Jmax) or ls.rotor(p.Jmax, { M = math.tointeger(tonumber(p.M)) })
    local B, muE, units = p.B, p.mu * p.E, nil
    if p.B_unit ~= "arb" then
      local u = ls.units
      units = p.energy_unit
      B = u.convert(p.B, p.B_unit, units)
      -- mu [C m] * E [V/m] = J
      muE = u.convert(u.convert(p.mu, p.mu_unit, "C*m") * u.convert(p.E, p.E_unit, "V/m"), "J", units)
    end
    return {
      basis = R, H0 = B * R.J2, V = -muE * R.cos, cos = R.cos, B = B, muE = muE, units = units,
      e2 = function(J, M)
        J = ls.recipes._argint("e2", 1, J, 0)
        M = ls.recipes._argint("e2", 2, M, -J, J)
        if J == 0 then return -muE * muE / (6 * B) end
        return muE * muE / (2 * B) * (J * (J + 1) - 3 * M * M) / (J * (J + 1) * (2 * J - 1) * (2 * J + 3))
      end,
    }
  end,
}
