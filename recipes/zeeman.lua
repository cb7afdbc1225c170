-- zeeman: one spin of any size in a magnetic field of any direction.
local ENERGY = { "GHz", "MHz", "kHz", "Hz", "THz", "cm^-1", "eV", "meV", "ueV", "hartree", "K", "mK", "J", "rad/s" }
local FIELD = { "T", "mT", "uT", "G", "GHz", "MHz", "kHz", "Hz", "cm^-1", "eV", "meV", "ueV", "hartree", "K", "mK" }
return {
  about = "Zeeman term gfactor mu_B B.S for a spin of any size, field in any direction",
  doc = [[
H0 = 0 (the 2S+1 states of the multiplet, degenerate)
V  = gfactor mu_B B (sin(theta) cos(phi) Sx + sin(theta) sin(phi) Sy + cos(theta) Sz)

Exact levels: gfactor mu_B B m, m = -S .. S, whatever the direction (common
practice: rotate the quantization axis along the field). ls.perturb finds
them at first order from the fully degenerate H0.
Units: the field is given in field_unit: tesla units (T, mT, uT, G) or an
energy unit, meaning the Bohr-magneton energy mu_B B itself (1 T = 13.996 GHz
for mu_B/h, CODATA 2018 via ls.units). Energies come out in energy_unit.
gfactor defaults to |g_e| = 2.00231930436256 (CODATA 2018); the sign
convention is the usual one of spin resonance, H = +g mu_B B.S with g > 0.
Basis: ls.spin(spin), states m = +S .. -S (label m).]],
  params = {
    { name = "spin", default = 0.5, unit = "hbar", about = "spin quantum number S", half_integer = true,
      positive = true, max = 100 },
    { name = "field", default = 0.35, invented = true, unit = "field_unit", about = "field magnitude B" },
    { name = "field_unit", default = "T", about = "unit of field (tesla or an energy for mu_B B)", choices = FIELD },
    { name = "theta", default = 0, unit = "degree", about = "polar angle of the field from z" },
    { name = "phi", default = 0, unit = "degree", about = "azimuth of the field from x" },
    { name = "gfactor", default = 2.00231930436256, unit = "", about = "g factor (positive for an electron spin)" },
    { name = "energy_unit", default = "GHz", about = "unit of the energies", choices = ENERGY },
  },
  build = function(ls, p)
    local s = ls.spin(p.spin)
    local b = p.gfactor * ls.units.convert(p.field, p.field_unit, p.energy_unit) -- g mu_B B
    local th, ph = math.rad(p.theta), math.rad(p.phi)
    local cx, cy, cz = math.sin(th) * math.cos(ph), math.sin(th) * math.sin(ph), math.cos(th)
    local V = b * cz * s.Sz
    if math.abs(cx) > 1e-15 then V = V + (b * cx) * s.Sx end
    if math.abs(cy) > 1e-15 then V = V + (b * cy) * s.Sy end
    local H0 = 0 * s.Sz
    local n = math.floor(2 * p.spin + 0.5) + 1
    local exact = {}
    for i = 1, n do exact[i] = b * (i - 1 - p.spin) end
    table.sort(exact)
    return {
      basis = s, H0 = H0, V = V, units = p.energy_unit,
      exact = function(level) return exact[ls.recipes._argint("exact", 1, level, 1, #exact)] end,
    }
  end,
}
