--- levelshift.units (ls.units): CODATA 2018 constants and unit conversions.
--
-- Source of every value: E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor,
-- "CODATA recommended values of the fundamental physical constants: 2018",
-- Rev. Mod. Phys. 93, 025010 (2021). Values are SI unless the name says
-- otherwise. Since the 2019 SI redefinition h, e, k_B, N_A and c are exact;
-- derived exact values (hbar, eV in Hz, K, cm^-1) are computed from them.
--
--   ls.units.h, .hbar, .e, .m_e, .c, .k_B, .mu_B, .mu_N, .a0, .E_h, .alpha, .g_e ...
--   ls.units.constants[name] -> {value=, unit=, uncertainty=, exact=, about=}
--   ls.units.convert(value, from, to)      e.g. convert(1, "hartree", "cm^-1")
--   ls.units.units() -> every unit name, by kind
--
-- Unit kinds (conversion only inside a kind):
--   energy: hartree (Eh), eV, meV, ueV, J, cm^-1 (cm-1), m^-1, Hz, kHz, MHz, GHz,
--           THz (E = h f), rad/s (E = hbar omega), K, mK (E = k_B T),
--           T, mT, uT, G (magnetic field as the Bohr-magneton energy mu_B B)
--   electric field: V/m, V/cm, kV/cm, au_field (atomic unit E_h/(e a0))
--   length: m, cm, mm, um, nm, pm, angstrom, bohr (a0)
--   magnetic field: tesla, gauss, au_bfield (atomic unit hbar/(e a0^2))
--     (use "T" and friends for an energy mu_B B; "tesla" for the field itself)
local U = {}

U.edition = "CODATA 2018"
U.source = "E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, Rev. Mod. Phys. 93, 025010 (2021)"

-- name, value, standard uncertainty (0 = exact), unit, description
local table2018 = {
  -- exact (SI 2019)
  { "c", 299792458, 0, "m s^-1", "speed of light in vacuum" },
  { "h", 6.62607015e-34, 0, "J Hz^-1", "Planck constant" },
  { "e", 1.602176634e-19, 0, "C", "elementary charge" },
  { "k_B", 1.380649e-23, 0, "J K^-1", "Boltzmann constant" },
  { "N_A", 6.02214076e23, 0, "mol^-1", "Avogadro constant" },
  -- recommended values (uncertainty in the same unit)
  { "alpha", 7.2973525693e-3, 0.0000000011e-3, "", "fine-structure constant" },
  { "alpha_inv", 137.035999084, 0.000000021, "", "inverse fine-structure constant" },
  { "m_e", 9.1093837015e-31, 0.0000000028e-31, "kg", "electron mass" },
  { "m_p", 1.67262192369e-27, 0.00000000051e-27, "kg", "proton mass" },
  { "m_u", 1.66053906660e-27, 0.00000000050e-27, "kg", "atomic mass constant" },
  { "m_p_over_m_e", 1836.15267343, 0.00000011, "", "proton-electron mass ratio" },
  { "mu_B", 9.2740100783e-24, 0.0000000028e-24, "J T^-1", "Bohr magneton" },
  { "mu_B_Hz", 1.39962449361e10, 0.00000000042e10, "Hz T^-1", "Bohr magneton in Hz/T" },
  { "mu_B_K", 0.67171381563, 0.00000000020, "K T^-1", "Bohr magneton in K/T" },
  { "mu_B_eV", 5.7883818060e-5, 0.0000000017e-5, "eV T^-1", "Bohr magneton in eV/T" },
  { "mu_N", 5.0507837461e-27, 0.0000000015e-27, "J T^-1", "nuclear magneton" },
  { "mu_N_MHz", 7.6225932291, 0.0000000023, "MHz T^-1", "nuclear magneton in MHz/T" },
  { "a0", 5.29177210903e-11, 0.00000000080e-11, "m", "Bohr radius" },
  { "E_h", 4.3597447222071e-18, 0.0000000000085e-18, "J", "Hartree energy" },
  { "E_h_eV", 27.211386245988, 0.000000000053, "eV", "Hartree energy in eV" },
  { "E_h_Hz", 6.579683920502e15, 0.000000000013e15, "Hz", "hartree-hertz relationship" },
  { "E_h_invm", 2.1947463136320e7, 0.0000000000043e7, "m^-1", "hartree-inverse meter relationship" },
  { "E_h_K", 3.1577502480407e5, 0.0000000000061e5, "K", "hartree-kelvin relationship" },
  { "R_inf", 10973731.568160, 0.000021, "m^-1", "Rydberg constant" },
  { "Ry_eV", 13.605693122994, 0.000000000026, "eV", "Rydberg constant times hc in eV" },
  { "g_e", -2.00231930436256, 0.00000000000035, "", "electron g factor" },
  { "g_p", 5.5856946893, 0.0000000016, "", "proton g factor" },
  { "gamma_e_MHz", 28024.9514242, 0.0000085, "MHz T^-1", "electron gyromagnetic ratio over 2 pi" },
  { "m_e_c2", 8.1871057769e-14, 0.0000000025e-14, "J", "electron mass energy equivalent" },
  { "m_e_c2_MeV", 0.51099895000, 0.00000000015, "MeV", "electron mass energy equivalent in MeV" },
  { "au_time", 2.4188843265857e-17, 0.0000000000047e-17, "s", "atomic unit of time" },
  { "au_efield", 5.14220674763e11, 0.00000000078e11, "V m^-1", "atomic unit of electric field" },
  { "au_bfield", 2.35051756758e5, 0.00000000071e5, "T", "atomic unit of magnetic flux density" },
  { "au_dipole", 8.4783536255e-30, 0.0000000013e-30, "C m", "atomic unit of electric dipole moment" },
  { "mu_0", 1.25663706212e-6, 0.00000000019e-6, "N A^-2", "vacuum magnetic permeability" },
  { "eps_0", 8.8541878128e-12, 0.0000000013e-12, "F m^-1", "vacuum electric permittivity" },
}

U.constants = {}
for _, r in ipairs(table2018) do
  U.constants[r[1]] = { value = r[2], uncertainty = r[3], exact = r[3] == 0, unit = r[4], about = r[5] }
  U[r[1]] = r[2]
end
-- exact, derived from the defining constants
U.hbar = U.h / (2 * math.pi)
U.constants.hbar = { value = U.hbar, uncertainty = 0, exact = true, unit = "J s", about = "reduced Planck constant (h / 2 pi)" }

-- energy units: joules per unit
local energy = {
  hartree = U.E_h, Eh = U.E_h,
  eV = U.e, meV = 1e-3 * U.e, ueV = 1e-6 * U.e,
  J = 1,
  ["cm^-1"] = 100 * U.h * U.c, ["cm-1"] = 100 * U.h * U.c, ["m^-1"] = U.h * U.c,
  Hz = U.h, kHz = 1e3 * U.h, MHz = 1e6 * U.h, GHz = 1e9 * U.h, THz = 1e12 * U.h,
  ["rad/s"] = U.hbar,
  K = U.k_B, mK = 1e-3 * U.k_B,
  T = U.mu_B, mT = 1e-3 * U.mu_B, uT = 1e-6 * U.mu_B, G = 1e-4 * U.mu_B,
}
local efield = { ["V/m"] = 1, ["V/cm"] = 100, ["kV/cm"] = 1e5, au_field = U.au_efield }
local length = { m = 1, cm = 1e-2, mm = 1e-3, um = 1e-6, nm = 1e-9, pm = 1e-12, angstrom = 1e-10, bohr = U.a0 }
local bfield = { tesla = 1, gauss = 1e-4, au_bfield = U.au_bfield }

local kinds = {
  { "energy", energy, { "hartree", "Eh", "eV", "meV", "ueV", "J", "cm^-1", "cm-1", "m^-1", "Hz", "kHz",
    "MHz", "GHz", "THz", "rad/s", "K", "mK", "T", "mT", "uT", "G" } },
  { "electric field", efield, { "V/m", "V/cm", "kV/cm", "au_field" } },
  { "length", length, { "m", "cm", "mm", "um", "nm", "pm", "angstrom", "bohr" } },
  { "magnetic field", bfield, { "tesla", "gauss", "au_bfield" } },
}

local function lookup(u)
  for _, k in ipairs(kinds) do
    if k[2][u] then return k[2][u], k[1] end
  end
  return nil
end

local function accepted()
  local t = {}
  for _, k in ipairs(kinds) do t[#t + 1] = k[1] .. ": " .. table.concat(k[3], " ") end
  return table.concat(t, "; ")
end

--- units.units() -> { energy = {...}, ["electric field"] = {...}, ... } (names in order).
function U.units()
  local t = {}
  for _, k in ipairs(kinds) do
    local l = {}
    for i, n in ipairs(k[3]) do l[i] = n end
    t[k[1]] = l
  end
  return t
end

--- units.convert(value, from, to) -> value in `to`.
-- Energies, frequencies (E = h f), wavenumbers (E = h c / lambda), temperatures
-- (E = k_B T) and magnetic fields as Zeeman energies (E = mu_B B, units T, mT,
-- uT, G) convert into each other; so do electric fields, lengths and magnetic
-- fields among themselves.
function U.convert(value, from, to)
  if type(value) ~= "number" then
    error("bad argument #1 to 'convert' (number expected, got " .. type(value) .. ")", 2)
  end
  if type(from) ~= "string" then
    error("bad argument #2 to 'convert' (unit name expected, got " .. type(from) .. ")", 2)
  end
  if type(to) ~= "string" then
    error("bad argument #3 to 'convert' (unit name expected, got " .. type(to) .. ")", 2)
  end
  local a, ka = lookup(from)
  if not a then error("bad argument #2 to 'convert' (unknown unit '" .. from .. "'; accepted: " .. accepted() .. ")", 2) end
  local b, kb = lookup(to)
  if not b then error("bad argument #3 to 'convert' (unknown unit '" .. to .. "'; accepted: " .. accepted() .. ")", 2) end
  if ka ~= kb then
    error("bad argument #3 to 'convert' (cannot convert " .. ka .. " '" .. from .. "' to " .. kb .. " '" .. to .. "')", 2)
  end
  if from == to then return value end
  return value * (a / b)
end

--- units.kind(name) -> "energy" | "electric field" | "length" | "magnetic field" | nil
function U.kind(name)
  local _, k = lookup(name)
  return k
end

return U
