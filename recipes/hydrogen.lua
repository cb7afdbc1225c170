-- hydrogen: the hydrogen atom in a uniform electric field (Stark effect),
-- with pseudostates standing in for the continuum.
return {
  about = "hydrogen atom in a uniform field F along z (Stark effect), continuum included",
  doc = [[
H  = H0 + V,   H0 = p^2/2 - 1/r,   V = F z            (atomic units)

Units: atomic units (hartree for energies, bohr for lengths, the atomic
unit of field E_h/(e a0) = 5.142e11 V/m for F; ls.units converts).

Basis: for each l = 0..lmax (and each m, or one fixed m) the Coulomb-
Sturmian functions r^(l+1) e^(-kappa r) L_k^(2l+1)(2 kappa r), k = 0..nmax-1
(Rotenberg, Ann. Phys. 19, 262 (1962)), diagonalized per (l, m) in C
(ls.coulomb_basis), so the states are eigenstates of H0 with labels n, l, m
(n = l + 1 + rank inside its (l, m) block: the principal number for bound
states, a pseudo number for the others). With kappa = 1/2 the n = 2 shell
lies in the space exactly (E = -1/8), 1s converges geometrically in nmax,
and the positive-energy pseudostates carry the continuum part of every
sum over states, so second-order Stark shifts converge to the true values
(alpha(1s) = 9/2, not the bound-states-only 3.66). All radial integrals are
exact inside the space (Laguerre recurrences, no quadrature).

V = F z couples (l, m) to (l +- 1, m) with <l+1, m|cos theta|l, m> =
sqrt(((l+1)^2 - m^2)/((2l+1)(2l+3))). Order K of shell n is complete
when lmax >= n - 1 + floor(K/2) (the path of K dipole steps back to the
shell climbs floor(K/2) above its largest l): the default lmax = 3 serves
n = 1 through order 7, n = 2 through order 5, n = 3 through order 3.

Which levels to trust: the shells the space holds exactly (n = 1/kappa) and
those it has converged (1s and n = 3 at the defaults) form clean degenerate
groups. Higher shells are approximated differently in each l, so their
members are only nearly degenerate (splittings ~1e-8 for n = 4 at lmax = 1,
nmax = 16): ls.perturb then treats them as separate levels and warns about
small denominators. Take kappa = 1/n for shell n, or raise degen_tol.
At larger F, exact diagonalization of H0 + V shows outer pseudostates
sliding down the field's slope (the atom ionizes); no series describes them.

Checks (tests/lua/hydrogen_spec.lua): alpha(1s) = 9/2, E4(1s) = -3555/64 F^4,
n = 2: E1 = -3F, 0, 0, +3F and E2 = -(F^2/16) n^4 [17 n^2 - 3 (n1 - n2)^2
- 9 m^2 + 19] in parabolic quantum numbers (-84 F^2 for m = 0, -78 F^2 for
|m| = 1); Bethe & Salpeter, Quantum Mechanics of One- and Two-Electron Atoms
(1957), sec. 52.

The field may be given in V/m, V/cm or kV/cm (field_unit); the model works in
atomic units. Model fields besides basis, H0, V: z (the operator z, so V = F z),
field (F in atomic units),
bohr(n) = -1/(2 n^2), units = "hartree".]],
  params = {
    { name = "field", default = 1e-3, invented = true, unit = "field_unit", about = "field F along z: V = F z" },
    { name = "field_unit", default = "au_field", unit = "", about = "unit of field (au_field = E_h/(e a0) = 5.142e11 V/m)",
      choices = { "au_field", "V/m", "V/cm", "kV/cm" } },
    { name = "lmax", default = 3, unit = "", about = "largest orbital angular momentum l kept",
      integer = true, min = 0, max = 200 },
    { name = "nmax", default = 16, unit = "", about = "radial Laguerre functions per l (k = 0..nmax-1); at least 2 so that n = 2 fits",
      integer = true, min = 2, max = 2000 },
    { name = "kappa", default = 0.5, unit = "1/bohr", about = "Sturmian exponent; 1/n holds shell n exactly",
      positive = true },
    { name = "m", default = "all", unit = "", about = "magnetic quantum number kept: an integer |m| <= lmax, or all" },
  },
  check = function(p)
    if p.m ~= "all" then
      local m = math.tointeger(tonumber(p.m))
      if m == nil then
        error("recipe 'hydrogen': parameter 'm' must be an integer or \"all\" (got " .. tostring(p.m) .. ")", 0)
      end
      if math.abs(m) > p.lmax then
        error(string.format("recipe 'hydrogen': parameter 'm' = %d exceeds lmax = %d (no state has |m| > l)", m, p.lmax), 0)
      end
    end
  end,
  build = function(ls, p)
    local m = p.m == "all" and "all" or math.tointeger(tonumber(p.m))
    local B = ls.coulomb_basis { lmax = p.lmax, nmax = p.nmax, kappa = p.kappa, m = m }
    local z = B.z
    local F = p.field_unit == "au_field" and p.field or ls.units.convert(p.field, p.field_unit, "au_field")
    return {
      basis = B, H0 = B.H0, V = F * z, z = z, field = F, -- field in atomic units
      units = "hartree",
      bohr = function(n)
        n = ls.recipes._argint("bohr", 1, n, 1)
        return -1 / (2 * n * n)
      end,
    }
  end,
}
