-- Dispersive shift of a qubit coupled to one mode, from the qubit_mode recipe
-- and ls.effective. All parameters are invented for the example (a qubit near
-- 6.1 GHz, a mode at 5.0 GHz, coupling 85 MHz; energies in GHz, hbar = 1 with
-- frequencies in GHz standing for h f).
--   build/levelshift examples/recipe_dispersive.lua [coupling=0.085] [form=rabi]
local p = params or {}
local coupling = p.coupling or 0.085
local form = p.form or "jc"
local wm = 5.0

print(string.format("invented qubit + mode: omega_mode = %.3f GHz, coupling = %.3f GHz, form = %s", wm, coupling, form))
print(string.format("%10s %14s %14s %14s %14s", "wq (GHz)", "chi=g^2/D", "eff. order 2", "eff. order 4", "exact"))
for _, wq in ipairs({ 5.6, 5.8, 6.1, 6.5, 7.0 }) do
  local m = ls.recipe("qubit_mode", { omega_qubit = wq, omega_mode = wm, coupling = coupling, form = form, levels = 12 })
  local lg, le = m.level("g", 0), m.level("e", 0)
  -- the qubit line with no photon: E(e,0) - E(g,0), bare value wq
  local function line(order)
    local h = ls.effective(m.H0, m.V, { levels = { lg, le }, order = order })
    local E = ls.eigen(h:at(1), { vectors = false })
    return E[2] - E[1]
  end
  -- exact: the eigenvalues of H0 + V that continue the two states (largest overlap)
  local E, U = ls.eigen(m.H0 + m.V)
  local function follow(idx)
    local best, bi = -1, 1
    for k = 1, #E do
      local re, im = U:get(idx, k)
      local w = re * re + im * im
      if w > best then best, bi = w, k end
    end
    return E[bi]
  end
  local ig, ie = m.basis:find{ -0.5, 0 }, m.basis:find{ 0.5, 0 }
  local exact = follow(ie) - follow(ig)
  print(string.format("%10.3f %14.6f %14.6f %14.6f %14.6f", wq, coupling ^ 2 / (wq - wm),
    line(2) - wq, line(4) - wq, exact - wq))
end
print("columns 3-5: shift of the qubit line from wq (GHz); chi = g^2/(wq - wm) is the")
print("textbook dispersive shift (Jaynes-Cummings, rotating wave)")
