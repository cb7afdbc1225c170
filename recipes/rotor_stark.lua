-- rotor_stark: a linear rigid rotor in a static electric field (Stark effect).
return {
  about = "rigid rotor B J^2 in a field: V = -mu E cos(theta) (second-order Stark shifts)",
  doc = [[
H0 = B J^2,  E_J = B J(J+1), states |J M>, J = 0..Jmax        (hbar = 1)
V  = -mu E cos(theta)   (field along z; cos theta couples J <-> J +- 1, same M)

Units: B and mu*E in one energy unit (e.g. B in cm^-1, mu*E in cm^-1: for mu
in debye and E in V/cm, mu*E[cm^-1] = 0.0168 mu[D] E[kV/cm], from memory).
Basis: ls.rotor(Jmax) with every M, or the states of one M (M = "all" or an
integer). cos theta elements from Clebsch-Gordan coefficients in the core.

Second-order shifts (Townes & Schawlow, Microwave Spectroscopy, 1955, ch. 10):
  E2(J, M) = (mu E)^2/(2B) [J(J+1) - 3M^2] / [J(J+1)(2J-1)(2J+3)]   (J > 0)
  E2(0, 0) = -(mu E)^2/(6B)
First order vanishes; +M and -M stay degenerate at every order.
model.e2(J, M) returns the formula; exact for J < Jmax - 1 at second order.]],
  params = {
    { name = "B", default = 1, unit = "energy", about = "rotational constant", positive = true },
    { name = "mu", default = 1, unit = "dipole (energy/field)", about = "dipole moment" },
    { name = "E", default = 0.2, invented = true, unit = "field", about = "static field along z" },
    { name = "Jmax", default = 12, unit = "", about = "largest J kept", integer = true, min = 1, max = 200 },
    { name = "M", default = "all", unit = "", about = "\"all\", or one integer M (|M| <= Jmax)" },
  },
  check = function(p)
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
    local muE = p.mu * p.E
    return {
      basis = R, H0 = p.B * R.J2, V = -muE * R.cos, cos = R.cos,
      e2 = function(J, M)
        if J == 0 then return -muE * muE / (6 * p.B) end
        return muE * muE / (2 * p.B) * (J * (J + 1) - 3 * M * M) / (J * (J + 1) * (2 * J - 1) * (2 * J + 3))
      end,
    }
  end,
}
