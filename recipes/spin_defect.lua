-- spin_defect: an electron spin with zero-field splitting, a nucleus and a field.
local ENERGY = { "MHz", "GHz", "kHz", "Hz", "cm^-1", "eV", "meV", "ueV", "hartree", "K", "mK" }
local FIELD = { "T", "mT", "uT", "G" }
return {
  about = "spin S with zero-field splitting (zfs_d, zfs_e), hyperfine to a nucleus I, Zeeman",
  doc = [[
H0 = zfs_d (Sz^2 - S(S+1)/3) + zfs_e (Sx^2 - Sy^2)
     + hyperfine_par Sz Iz + hyperfine_perp (Sx Ix + Sy Iy)
     + quadrupole (3 Iz^2 - I(I+1)) / (4 I (2I - 1))       (I >= 1)
V  = gfactor mu_B B.S - nuclear_g mu_N B.I,
     B = field (sin(theta) cos(phi), sin(theta) sin(phi), cos(theta))

The zero-field part is the usual spin Hamiltonian of a defect or ion with an
axial (zfs_d) and rhombic (zfs_e) term (Abragam & Bleaney, Electron
Paramagnetic Resonance of Transition Ions, 1970); for S = 1 and no nucleus its
levels are -2D/3 and D/3 -/+ E, i.e. 0 and D -/+ E above the lowest.
The hyperfine tensor is axial about z. The nuclear quadrupole coupling is
axial about z too, quadrupole = e^2 q Q: for I = 1 it moves m_I = 0 by
-e^2qQ/2 and m_I = +-1 by +e^2qQ/4 (Abragam, The Principles of Nuclear
Magnetism, 1961, chapter VI). Tilted or rhombic tensors: build the model
with ls.spin_model (docs/models.md). The field term is the perturbation, so
ls.perturb / ls.effective give weak-field shifts and ls.sweep a field scan.
nuclear_spin = 0 means no nucleus (basis ls.spin(spin) alone); otherwise the
basis is ls.product(ls.spin(spin), ls.spin(nuclear_spin)), labels m1, m2.
Units: zfs_*, hyperfine_* and the energies in energy_unit; the field in
field_unit. The defaults are invented (a spin-1 centre, not a real one).]],
  params = {
    { name = "spin", default = 1, unit = "hbar", about = "electron spin S", half_integer = true, positive = true, max = 20 },
    { name = "zfs_d", default = 2710, invented = true, unit = "energy_unit", about = "axial zero-field splitting D" },
    { name = "zfs_e", default = 7.4, invented = true, unit = "energy_unit", about = "rhombic zero-field splitting E" },
    { name = "nuclear_spin", default = 0.5, unit = "hbar", about = "nuclear spin I (0: no nucleus)",
      half_integer = true, nonnegative = true, max = 20 },
    { name = "hyperfine_par", default = 3.1, invented = true, unit = "energy_unit", about = "hyperfine A along z" },
    { name = "hyperfine_perp", default = 2.6, invented = true, unit = "energy_unit", about = "hyperfine A in the xy plane" },
    { name = "quadrupole", default = 0, unit = "energy_unit", about = "nuclear quadrupole coupling e^2qQ (I >= 1)" },
    { name = "field", default = 0.9, invented = true, unit = "field_unit", about = "field magnitude B" },
    { name = "field_unit", default = "mT", about = "unit of field", choices = FIELD },
    { name = "theta", default = 25, invented = true, unit = "degree", about = "polar angle of the field from z" },
    { name = "phi", default = 0, unit = "degree", about = "azimuth of the field from x" },
    { name = "gfactor", default = 2.0028, invented = true, unit = "", about = "electron g factor (isotropic)" },
    { name = "nuclear_g", default = 0, unit = "", about = "nuclear g factor (0: no nuclear Zeeman)" },
    { name = "energy_unit", default = "MHz", about = "unit of the couplings and energies", choices = ENERGY },
  },
  build = function(ls, p)
    local S, I, basis
    if p.nuclear_spin > 0 then
      basis = ls.product(ls.spin(p.spin), ls.spin(p.nuclear_spin))
      S, I = basis:site(1), basis:site(2)
    else
      basis = ls.spin(p.spin)
      S = basis
    end
    local ss = p.spin * (p.spin + 1)
    local H0 = p.zfs_d * (S.Sz * S.Sz - ss / 3)
    if p.zfs_e ~= 0 then H0 = H0 + (p.zfs_e / 2) * (S.Sp * S.Sp + S.Sm * S.Sm) end -- Sx^2 - Sy^2
    if I then
      if p.hyperfine_par ~= 0 then H0 = H0 + p.hyperfine_par * (S.Sz * I.Sz) end
      if p.hyperfine_perp ~= 0 then
        H0 = H0 + (p.hyperfine_perp / 2) * (S.Sp * I.Sm + S.Sm * I.Sp) -- Sx Ix + Sy Iy
      end
      if p.quadrupole ~= 0 then
        local Ival = p.nuclear_spin
        if Ival < 1 then error("quadrupole needs a nuclear spin of 1 or more (nuclear_spin = " .. Ival .. ")", 2) end
        H0 = H0 + (p.quadrupole / (4 * Ival * (2 * Ival - 1))) * (3 * (I.Sz * I.Sz) - Ival * (Ival + 1))
      end
    elseif p.quadrupole ~= 0 then
      error("quadrupole needs a nucleus (nuclear_spin >= 1)", 2)
    end
    local u = ls.units
    local muB = u.convert(p.field, p.field_unit, p.energy_unit)
    local muN = muB * (u.mu_N / u.mu_B)
    local th, ph = math.rad(p.theta), math.rad(p.phi)
    local dir = { math.sin(th) * math.cos(ph), math.sin(th) * math.sin(ph), math.cos(th) }
    local function dot(X, c)
      local ops = { X.Sx, X.Sy, X.Sz }
      local acc = 0 * X.Sz
      for k = 1, 3 do
        if math.abs(dir[k]) > 1e-15 and c ~= 0 then acc = acc + (c * dir[k]) * ops[k] end
      end
      return acc
    end
    local V = dot(S, p.gfactor * muB)
    if I and p.nuclear_g ~= 0 then V = V - dot(I, p.nuclear_g * muN) end
    return { basis = basis, H0 = H0, V = V, units = p.energy_unit, electron = S, nucleus = I }
  end,
}
