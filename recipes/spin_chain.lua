-- spin_chain: an XXZ chain of equal spins built bond by bond.
return {
  about = "chain of N spins: sum_i J (Sx Sx + Sy Sy + anisotropy Sz Sz) + field sum Sz",
  doc = [[
H_flip  = exchange sum_bonds (S_i^x S_j^x + S_i^y S_j^y)
H_ising = exchange anisotropy sum_bonds S_i^z S_j^z
H_z     = field sum_i S_i^z
bonds (i, i+1), i = 1 .. sites-1, plus (sites, 1) when boundary = "periodic".
unperturbed = "ising":  H0 = H_ising + H_z, V = H_flip  (expansion in the flip-flop term)
unperturbed = "zeeman": H0 = H_z, V = H_flip + H_ising  (weak exchange)

anisotropy = 1 is the Heisenberg chain J sum S_i.S_j. Check: a periodic
ring of 4 spins 1/2 has E0 = -2J (S_A.S_B with sublattice spins 1 and 1,
common practice). field is the Bohr-magneton energy times g (g mu_B B), in
the energy unit of exchange. The states are products over sites (labels
m1 .. mN); the dimension (2S+1)^sites is limited to 262144 (the report's
exact levels come from the Krylov path: ARPACK per total-Sz sector).]],
  params = {
    { name = "sites", default = 6, unit = "", about = "number of spins", integer = true, min = 2, max = 24 },
    { name = "spin", default = 0.5, unit = "hbar", about = "spin of every site", half_integer = true, positive = true, max = 10 },
    { name = "exchange", default = 1, unit = "energy", about = "exchange J (> 0 antiferromagnetic)" },
    { name = "anisotropy", default = 1, unit = "", about = "XXZ delta (1: Heisenberg)" },
    { name = "field", default = 0, unit = "energy", about = "g mu_B B along z" },
    { name = "boundary", default = "open", about = "open or periodic chain", choices = { "open", "periodic" } },
    { name = "unperturbed", default = "ising", about = "which terms form H0", choices = { "ising", "zeeman" } },
  },
  check = function(p)
    local d = math.floor(2 * p.spin + 0.5) + 1
    if d ^ p.sites > 262144 then
      error(string.format("(2 spin + 1)^sites = %d^%d = %.0f states is above the limit of 262144", d, p.sites, d ^ p.sites), 0)
    end
    if p.boundary == "periodic" and p.sites < 3 then
      error("a periodic chain needs at least 3 sites (2 sites would count the bond twice)", 0)
    end
  end,
  build = function(ls, p)
    local P = ls.product(ls.spin(p.spin), p.sites)
    local site = {}
    for i = 1, p.sites do site[i] = P:site(i) end
    local nb = p.boundary == "periodic" and p.sites or p.sites - 1
    local function nxt(i) return i % p.sites + 1 end
    local flip = ls.sum(1, nb, function(i)
      local a, b = site[i], site[nxt(i)]
      return (0.5 * p.exchange) * (a.Sp * b.Sm + a.Sm * b.Sp)
    end)
    local ising = ls.sum(1, nb, function(i) return (p.exchange * p.anisotropy) * (site[i].Sz * site[nxt(i)].Sz) end)
    local zee = ls.sum(1, p.sites, function(i) return p.field * site[i].Sz end)
    local H0, V
    if p.unperturbed == "ising" then H0, V = ising + zee, flip else H0, V = zee, flip + ising end
    return { basis = P, H0 = H0, V = V, sites = site }
  end,
}
