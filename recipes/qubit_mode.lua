-- qubit_mode: a two-level system coupled to one oscillator mode.
return {
  about = "two-level system coupled to one mode: Jaynes-Cummings (form=jc) or Rabi (form=rabi)",
  doc = [[
H0 = omega_mode a^+ a + omega_qubit sz / 2           (sz = 2 Sz: +1 excited, -1 ground)
V  = coupling (s+ a + s- a^+)        form = "jc"   (rotating-wave, Jaynes-Cummings)
V  = coupling sx (a + a^+)           form = "rabi" (sx = 2 Sx; keeps the counter-rotating terms)
(hbar = 1; energies in the units of the omegas.)

Jaynes-Cummings exact levels (Jaynes & Cummings, Proc. IEEE 51, 89 (1963)):
|g,0> at -omega_qubit/2 and, for n >= 0, the pair
  omega_mode (n + 1/2) -/+ sqrt(detuning^2/4 + coupling^2 (n + 1)),
detuning = omega_qubit - omega_mode; model.jc_pair(n) returns both.
Dispersive limit (|detuning| >> coupling): |e,n> moves by +coupling^2 (n+1)/detuning,
|g,n> by -coupling^2 n/detuning, so the qubit line shifts by
chi (2n + 1) with chi = coupling^2/detuning; the Rabi form adds the
Bloch-Siegert term coupling^2/(omega_qubit + omega_mode) (Bloch & Siegert,
Phys. Rev. 57, 522 (1940)) to the qubit frequency.
Basis: ls.product(ls.spin(1/2), ls.oscillator(levels)): labels m1 (+1/2 =
excited, -1/2 = ground) and n2 (photons). model.level(q, n) gives the number
of state (q = "e" or "g", n photons) in the ordering of ls.perturb /
ls.effective (ascending H0; ties by basis order).]],
  params = {
    { name = "omega_qubit", default = 1.2, invented = true, unit = "energy (hbar = 1)", about = "qubit splitting", positive = true },
    { name = "omega_mode", default = 1, unit = "energy (hbar = 1)", about = "mode frequency", positive = true },
    { name = "coupling", default = 0.02, invented = true, unit = "energy", about = "coupling g" },
    { name = "form", default = "jc", about = "jc (rotating wave) or rabi (full)", choices = { "jc", "rabi" } },
    { name = "levels", default = 20, unit = "", about = "photon states kept (n = 0 .. levels-1)", integer = true, min = 2, max = 2000 },
  },
  build = function(ls, p)
    local B = ls.product(ls.spin(0.5), ls.oscillator(p.levels))
    local q, m = B:site(1), B:site(2)
    local H0 = p.omega_mode * m.number + p.omega_qubit * q.Sz
    local V
    if p.form == "jc" then
      V = p.coupling * (q.Sp * m.lower + q.Sm * m.raise)
    else
      V = (2 * p.coupling) * (q.Sx * (m.lower + m.raise))
    end
    local det = p.omega_qubit - p.omega_mode
    local function energy0(qq, n) return p.omega_mode * n + (qq == "e" and 0.5 or -0.5) * p.omega_qubit end
    local function level(qq, n)
      if qq ~= "e" and qq ~= "g" then error("level: qubit state must be \"e\" or \"g\"", 2) end
      if math.type(n) ~= "integer" or n < 0 or n >= p.levels then
        error("level: photon number must be an integer from 0 to " .. (p.levels - 1), 2)
      end
      local e, idx = energy0(qq, n), B:find{ qq == "e" and 0.5 or -0.5, n }
      local below = 0
      for _, s in ipairs({ "e", "g" }) do
        for k = 0, p.levels - 1 do
          local f, j = energy0(s, k), B:find{ s == "e" and 0.5 or -0.5, k }
          if f < e - 1e-12 * (1 + math.abs(e)) or (math.abs(f - e) <= 1e-12 * (1 + math.abs(e)) and j < idx) then
            below = below + 1
          end
        end
      end
      return below + 1
    end
    local function jc_pair(n)
      local r = math.sqrt(det ^ 2 / 4 + p.coupling ^ 2 * (n + 1))
      return p.omega_mode * (n + 0.5) - r, p.omega_mode * (n + 0.5) + r
    end
    return { basis = B, H0 = H0, V = V, qubit = q, mode = m, level = level, jc_pair = jc_pair }
  end,
}
