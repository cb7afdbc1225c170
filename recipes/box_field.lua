-- box_field: a particle in an infinite square well in a uniform field.
local pi = math.pi
return {
  about = "particle in a box in a uniform field F (exact second-order ground-state shift)",
  doc = [[
H0 = p^2/(2 mass) inside the box -width/2 < x < width/2 (infinite walls),
     E_n = n^2 pi^2/(2 mass width^2), n = 1, 2, ...                (hbar = 1)
V  = F x   (x measured from the centre of the box)

Units: hbar = 1; width, mass and F in any consistent units (F is a force:
energy/length; energies come out in units of 1/(mass width^2)). Basis: the
lowest `states` box states n = 1..states (ls.box, centered), matrix
elements of x in closed form from the core.

Exact second-order shift of the ground state:
  E2 = -(15 - pi^2) mass F^2 width^4 / (24 pi^4)
(the second-order sum over the closed-form <n|x|1>, summed in closed form;
the sum identity checked to 30 digits, see tests/lua/box_spec.lua). In the
centred box every odd order vanishes. model.e2_ground holds this value;
model.x is the position operator.]],
  params = {
    { name = "F", default = 1, invented = true, unit = "energy/length", about = "uniform force: V = F x" },
    { name = "width", default = 1, unit = "length", about = "box width", positive = true },
    { name = "mass", default = 1, unit = "mass", about = "particle mass", positive = true },
    { name = "states", default = 40, unit = "", about = "box states kept (n = 1 .. states)",
      integer = true, min = 2, max = 4000 },
  },
  build = function(ls, p)
    local B = ls.box(p.states, { width = p.width, mass = p.mass, centered = true })
    return {
      basis = B, H0 = B.H0, V = p.F * B.x, x = B.x,
      e2_ground = -(15 - pi * pi) * p.mass * p.F ^ 2 * p.width ^ 4 / (24 * pi ^ 4),
    }
  end,
}
