-- box_step: a particle in an infinite square well with a step on its floor.
local pi = math.pi
return {
  about = "particle in a box with a potential step V0 on 0 < x < edge",
  doc = [[
H0 = p^2/(2 mass) inside the box 0 < x < width (infinite walls),
     E_n = n^2 pi^2/(2 mass width^2), n = 1, 2, ...                (hbar = 1)
V  = V0 for 0 < x < edge, 0 for edge < x < width

Units: hbar = 1; width and edge in one length unit, V0 an energy in the
units of 1/(mass width^2). Basis: the lowest `states` box states (ls.box);
V's matrix comes from B:potential with the step given as a break point,
converged to 1e-12 of V0.

First-order shifts in closed form (elementary integration):
  E1(n) = V0 [edge/width - sin(2 n pi edge/width)/(2 n pi)]
model.first_order(n) returns it; model.exact is not available (the
levels follow from matching sines across the step; use ls.eigen on
H0 + V for them).]],
  params = {
    { name = "V0", default = 5, invented = true, unit = "energy", about = "height of the step (negative: a well)" },
    { name = "edge", default = 0.5, invented = true, unit = "length", about = "the step covers 0 < x < edge", positive = true },
    { name = "width", default = 1, unit = "length", about = "box width", positive = true },
    { name = "mass", default = 1, unit = "mass", about = "particle mass", positive = true },
    { name = "states", default = 40, unit = "", about = "box states kept (n = 1 .. states)",
      integer = true, min = 2, max = 4000 },
  },
  check = function(p)
    if p.edge >= p.width then
      error(string.format("parameter 'edge' (%g) must be inside the box (less than width = %g)", p.edge, p.width), 0)
    end
  end,
  build = function(ls, p)
    local B = ls.box(p.states, { width = p.width, mass = p.mass })
    local V0, edge = p.V0, p.edge
    local V = assert(B:potential(function(x) return x < edge and V0 or 0 end, { breaks = { edge } }))
    return {
      basis = B, H0 = B.H0, V = V, x = B.x,
      first_order = function(n)
        n = ls.recipes._argint("first_order", 1, n, 1)
        return V0 * (edge / p.width - math.sin(2 * n * pi * edge / p.width) / (2 * n * pi))
      end,
    }
  end,
}
