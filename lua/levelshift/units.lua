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
--   dipole: D (debye), ea0 (au_dipole), C*m
--     (1 D = 1e-21/c C m exactly by definition; e a0 = 8.4783536255e-30 C m,
--     CODATA 2018; so 1 D = 0.3934302... e a0. Dipole times field is an
--     energy: convert(mu, "D", "C*m") * convert(F, "kV/cm", "V/m") is in J.)
-- The table and the conversion factors live in the C core (csrc/core/units.c,
-- lvs_constant_* and lvs_unit_convert); this file words the errors.
local core = require "levelshift.core"

local U = {}

U.edition = "CODATA 2018"
U.source = "E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, Rev. Mod. Phys. 93, 025010 (2021)"

U.constants = core._constants()
for name, c in pairs(U.constants) do U[name] = c.value end

local kinds, kind_of = {}, {}
for _, r in ipairs(core._units()) do
  local name, kind = r[1], r[2]
  kind_of[name] = kind
  local k
  for _, x in ipairs(kinds) do if x[1] == kind then k = x end end
  if not k then
    k = { kind, {} }
    kinds[#kinds + 1] = k
  end
  k[2][#k[2] + 1] = name
end

local function accepted()
  local t = {}
  for _, k in ipairs(kinds) do t[#t + 1] = k[1] .. ": " .. table.concat(k[2], " ") end
  return table.concat(t, "; ")
end

--- units.units() -> { energy = {...}, ["electric field"] = {...}, ... } (names in order).
function U.units()
  local t = {}
  for _, k in ipairs(kinds) do
    local l = {}
    for i, n in ipairs(k[2]) do l[i] = n end
    t[k[1]] = l
  end
  return t
end

--- units.convert(value, from, to) -> value in `to`.
-- Energies, frequencies (E = h f), wavenumbers (E = h c / lambda), temperatures
-- (E = k_B T) and magnetic fields as Zeeman energies (E = mu_B B, units T, mT,
-- uT, G) convert into each other; so do electric fields, lengths and magnetic
-- fields among themselves; so do dipole moments.
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
  local ka, kb = kind_of[from], kind_of[to]
  if not ka then error("bad argument #2 to 'convert' (unknown unit '" .. from .. "'; accepted: " .. accepted() .. ")", 2) end
  if not kb then error("bad argument #3 to 'convert' (unknown unit '" .. to .. "'; accepted: " .. accepted() .. ")", 2) end
  if ka ~= kb then
    error("bad argument #3 to 'convert' (cannot convert " .. ka .. " '" .. from .. "' to " .. kb .. " '" .. to .. "')", 2)
  end
  return core._unit_convert(value, from, to)
end

--- units.kind(name) -> "energy" | "electric field" | "length" | "magnetic field" | "dipole" | nil
function U.kind(name)
  return kind_of[name]
end

return U
