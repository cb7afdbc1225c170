-- ls.units: CODATA 2018 constants and conversions.
-- Source of every reference number below (typed from the table, not from
-- the module): E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor,
-- "CODATA recommended values of the fundamental physical constants: 2018",
-- Rev. Mod. Phys. 93, 025010 (2021), Tables XXXI-XXXIII (values) and the
-- adopted values of the energy-equivalence table.
local ls = require "levelshift"
local u = ls.units

local function rel(expected, got, tol)
  local r = math.abs(got - expected) / math.abs(expected)
  assert(r <= tol, string.format("expected %.17g, got %.17g (relative %.3g > %.3g)", expected, got, r, tol))
end

describe("ls.units constants", function()
  it("holds the exact SI defining constants", function()
    -- source: CODATA 2018 (Tiesinga et al. 2021), exact values of the 2019 SI
    assert.are.equal(299792458, u.c)
    assert.are.equal(6.62607015e-34, u.h)
    assert.are.equal(1.602176634e-19, u.e)
    assert.are.equal(1.380649e-23, u.k_B)
    assert.are.equal(6.02214076e23, u.N_A)
    -- hbar = h / 2 pi = 1.054571817... e-34 J s (exact, table gives 10 digits)
    rel(1.054571817e-34, u.hbar, 1e-9)
    assert.is_true(u.constants.hbar.exact and u.constants.c.exact)
  end)

  it("holds the recommended values of the 2018 table", function()
    -- source: CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021))
    local tab = {
      alpha = 7.2973525693e-3, m_e = 9.1093837015e-31, mu_B = 9.2740100783e-24,
      mu_N = 5.0507837461e-27, a0 = 5.29177210903e-11, E_h = 4.3597447222071e-18,
      g_e = -2.00231930436256, g_p = 5.5856946893, m_p = 1.67262192369e-27,
      R_inf = 10973731.568160, au_efield = 5.14220674763e11, mu_B_Hz = 1.39962449361e10,
      E_h_eV = 27.211386245988, E_h_invm = 2.1947463136320e7, E_h_K = 3.1577502480407e5,
      mu_0 = 1.25663706212e-6, eps_0 = 8.8541878128e-12, alpha_inv = 137.035999084,
    }
    for k, v in pairs(tab) do
      assert.are.equal(v, u[k], k)
      assert.are.equal(v, u.constants[k].value, k)
      assert.is_false(u.constants[k].exact)
      assert.is_true(u.constants[k].uncertainty > 0 and u.constants[k].uncertainty < 1e-8 * math.abs(v))
    end
    -- standard uncertainties from the table: alpha 0.0000000011e-3, m_e 0.0000000028e-31
    rel(1.1e-12, u.constants.alpha.uncertainty, 1e-9)
    rel(2.8e-40, u.constants.m_e.uncertainty, 1e-9)
    assert.are.equal("CODATA 2018", u.edition)
  end)

  it("satisfies the defining relations between constants", function()
    -- source: the relations used to build the adjustment (Tiesinga et al. 2021,
    -- sec. on derived constants); agreement limited by the rounding of the table
    rel(u.E_h, u.alpha ^ 2 * u.m_e * u.c ^ 2, 1e-9)               -- E_h = alpha^2 m_e c^2
    rel(u.mu_B, u.e * u.hbar / (2 * u.m_e), 1e-9)                  -- mu_B = e hbar / 2 m_e
    rel(u.mu_N, u.e * u.hbar / (2 * u.m_p), 1e-9)                  -- mu_N = e hbar / 2 m_p
    rel(u.a0, u.hbar / (u.m_e * u.c * u.alpha), 1e-9)              -- a0 = hbar / (m_e c alpha)
    rel(u.R_inf, u.alpha ^ 2 * u.m_e * u.c / (2 * u.h), 1e-9)      -- R_inf = alpha^2 m_e c / 2h
    rel(u.au_efield, u.E_h / (u.e * u.a0), 1e-9)                   -- E_au = E_h / (e a0)
    rel(u.au_bfield, u.hbar / (u.e * u.a0 ^ 2), 1e-9)              -- B_au = hbar / (e a0^2)
    rel(u.alpha_inv, 1 / u.alpha, 1e-9)
    rel(u.mu_0, 2 * u.alpha * u.h / (u.e ^ 2 * u.c), 1e-9)         -- mu_0 = 2 alpha h / (e^2 c)
    rel(u.eps_0, 1 / (u.mu_0 * u.c ^ 2), 1e-9)
    rel(u.m_e_c2, u.m_e * u.c ^ 2, 1e-9)
    rel(u.g_e, -u.gamma_e_MHz * 1e6 * u.h / u.mu_B, 1e-9)     -- |g_e| mu_B = h gamma_e/2pi
    rel(u.m_p_over_m_e, u.m_p / u.m_e, 1e-9)
  end)
end)

describe("ls.units.convert", function()
  it("converts energies as in the energy-equivalence table", function()
    -- source: CODATA 2018 energy equivalents (Tiesinga et al. 2021)
    rel(27.211386245988, u.convert(1, "hartree", "eV"), 1e-12)
    rel(219474.63136320, u.convert(1, "hartree", "cm^-1"), 1e-12)
    rel(6.579683920502e15, u.convert(1, "hartree", "Hz"), 1e-12)
    rel(3.1577502480407e5, u.convert(1, "hartree", "K"), 1e-12)
    rel(2.417989242e14, u.convert(1, "eV", "Hz"), 1e-9)          -- exact, 10 digits shown
    rel(1.160451812e4, u.convert(1, "eV", "K"), 1e-9)            -- exact
    rel(8065.543937, u.convert(1, "eV", "cm-1"), 1e-9)           -- exact
    rel(2.083661912e10, u.convert(1, "K", "Hz"), 1e-9)           -- kelvin-hertz, exact
    rel(29.9792458, u.convert(1, "cm^-1", "GHz"), 1e-15)         -- c in cm/ns, exact
    rel(13.9962449361, u.convert(1, "T", "GHz"), 1e-11)          -- mu_B/h in GHz/T
    rel(0.67171381563, u.convert(1, "T", "K"), 1e-10)            -- mu_B/k in K/T
    rel(5.7883818060e-5, u.convert(1, "T", "eV"), 1e-10)         -- mu_B in eV/T
    rel(46.686447783 / 100, u.convert(1, "T", "cm^-1"), 1e-9)     -- mu_B/hc in m^-1/T
    rel(1.39962449361, u.convert(1, "G", "MHz"), 1e-11)
    rel(1 / (2 * math.pi), u.convert(1, "rad/s", "Hz"), 1e-15)
  end)

  it("converts fields and lengths", function()
    rel(5.14220674763e11, u.convert(1, "au_field", "V/m"), 1e-15)
    rel(1e5 / 5.14220674763e11, u.convert(1, "kV/cm", "au_field"), 1e-12)
    rel(0.529177210903, u.convert(1, "bohr", "angstrom"), 1e-12)
    rel(2.35051756758e5, u.convert(1, "au_bfield", "tesla"), 1e-15)
    assert.are.equal(1e-4, u.convert(1, "gauss", "tesla"))
  end)

  it("converts dipole moments (debye by definition, e a0 from CODATA 2018)", function()
    -- 1 D = 1e-18 statC cm = 1e-21/c C m exactly (definition of the debye, c exact in SI 2019)
    rel(1e-21 / 299792458, u.convert(1, "D", "C*m"), 1e-15)
    rel(3.33564095198152e-30, u.convert(1, "debye", "C*m"), 1e-14)
    -- atomic unit of electric dipole moment e a0 = 8.4783536255e-30 C m
    -- source: CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010 (2021))
    rel(8.4783536255e-30, u.convert(1, "ea0", "C*m"), 1e-15)
    rel(8.4783536255e-30, u.convert(1, "au_dipole", "C*m"), 1e-15)
    -- and e a0 from the table's e and a0 agrees within the table's uncertainty (1.5e-10)
    rel(1.602176634e-19 * 5.29177210903e-11, u.convert(1, "ea0", "C*m"), 3e-10)
    -- 1 D in e a0: (1e-21/c) / 8.4783536255e-30 = 0.393430269522 (hand division)
    rel(0.393430269522, u.convert(1, "D", "ea0"), 1e-11)
    rel(1 / 0.393430269522, u.convert(1, "ea0", "D"), 1e-11)
    assert.are.equal("dipole", u.kind("D"))
    -- dipole times field is an energy: 1 D * 1 kV/cm / h = 1e-16/(c h) Hz = 0.50341165675 GHz
    -- (hand conversion from the exact c and h; 0.5034 GHz from memory)
    rel(0.50341165675427, u.convert(u.convert(1, "D", "C*m") * u.convert(1, "kV/cm", "V/m"), "J", "GHz"), 1e-13)
    assert.error_matches(function() u.convert(1, "Debye", "C*m") end,
      "unknown unit 'Debye'; accepted: energy:", 1, true)
    assert.error_matches(function() u.convert(1, "furlong", "D") end,
      "dipole: D debye ea0 au_dipole C*m", 1, true)
    assert.error_matches(function() u.convert(1, "D", "V/m") end,
      "cannot convert dipole 'D' to electric field 'V/m'", 1, true)
  end)

  it("round-trips and is linear", function()
    local names = u.units().energy
    for i = 1, #names do
      for j = 1, #names do
        local x = 2.385
        rel(x, u.convert(u.convert(x, names[i], names[j]), names[j], names[i]), 1e-14)
      end
    end
    rel(-3 * 27.211386245988, u.convert(-3, "Eh", "eV"), 1e-12)
    assert.are.equal("energy", u.kind("MHz"))
    assert.are.equal("electric field", u.kind("V/cm"))
    assert.is_nil(u.kind("furlong"))
  end)

  it("names the argument and lists the accepted units on an error", function()
    assert.error_matches(function() u.convert("1", "eV", "K") end,
      "bad argument #1 to 'convert' (number expected, got string)", 1, true)
    assert.error_matches(function() u.convert(1, "Ghz", "K") end,
      "bad argument #2 to 'convert' (unknown unit 'Ghz'; accepted: energy: hartree Eh eV", 1, true)
    assert.error_matches(function() u.convert(1, "eV", "parsec") end,
      "bad argument #3 to 'convert' (unknown unit 'parsec'", 1, true)
    assert.error_matches(function() u.convert(1, "eV", nil) end,
      "bad argument #3 to 'convert' (unit name expected, got nil)", 1, true)
    assert.error_matches(function() u.convert(1, "V/m", "GHz") end,
      "bad argument #3 to 'convert' (cannot convert electric field 'V/m' to energy 'GHz')", 1, true)
  end)
end)
