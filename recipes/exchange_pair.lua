-- exchange_pair: two spins with (XXZ) exchange in a field along z.
return {
  about = "two spins S1, S2 with exchange J (S1x S2x + S1y S2y + anisotropy S1z S2z) and a field",
  doc = [[
H_ex = exchange (S1x S2x + S1y S2y + anisotropy S1z S2z)
H_z  = field (gfactor1 S1z + gfactor2 S2z)
unperturbed = "exchange": H0 = H_ex, V = H_z   (weak field on the pair multiplets)
unperturbed = "zeeman":   H0 = H_z,  V = H_ex  (weak exchange between field-split spins)

anisotropy = 1 is the isotropic Heisenberg coupling J S1.S2; exchange > 0 is
antiferromagnetic. For S1 = S2 = 1/2 and anisotropy = 1 the levels of H_ex
are the singlet -3J/4 and the triplet J/4 (common practice:
S1.S2 = (S(S+1) - S1(S1+1) - S2(S2+1))/2). Different g factors mix the
singlet with the m = 0 triplet state.
Units: energies in any one unit (field is the Bohr-magneton energy mu_B B in
that unit). Basis: ls.product(ls.spin(spin1), ls.spin(spin2)), labels m1, m2.]],
  params = {
    { name = "spin1", default = 0.5, unit = "hbar", about = "spin of site 1", half_integer = true, positive = true, max = 20 },
    { name = "spin2", default = 0.5, unit = "hbar", about = "spin of site 2", half_integer = true, positive = true, max = 20 },
    { name = "exchange", default = 1, unit = "energy", about = "exchange constant J (> 0 antiferromagnetic)" },
    { name = "anisotropy", default = 1, unit = "", about = "zz exchange relative to xx, yy (XXZ delta)" },
    { name = "field", default = 0.05, invented = true, unit = "energy", about = "mu_B B along z" },
    { name = "gfactor1", default = 2, unit = "", about = "g factor of site 1" },
    { name = "gfactor2", default = 2, unit = "", about = "g factor of site 2" },
    { name = "unperturbed", default = "exchange", about = "which term is H0", choices = { "exchange", "zeeman" } },
  },
  build = function(ls, p)
    local P = ls.product(ls.spin(p.spin1), ls.spin(p.spin2))
    local a, b = P:site(1), P:site(2)
    local Hex = p.exchange * (0.5 * (a.Sp * b.Sm + a.Sm * b.Sp) + p.anisotropy * (a.Sz * b.Sz))
    local Hz = p.field * (p.gfactor1 * a.Sz + p.gfactor2 * b.Sz)
    local H0, V = Hex, Hz
    if p.unperturbed == "zeeman" then H0, V = Hz, Hex end
    return { basis = P, H0 = H0, V = V, exchange_term = Hex, zeeman_term = Hz, site1 = a, site2 = b }
  end,
}
