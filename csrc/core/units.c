/* units.c -- CODATA 2018 constants and unit conversions.
 *
 * source of every value: E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor,
 * "CODATA recommended values of the fundamental physical constants: 2018",
 * Rev. Mod. Phys. 93, 025010 (2021). SI unless the unit says otherwise;
 * uncertainty 0 marks an exact value (the 2019 SI fixes h, e, k_B, N_A, c).
 * hbar and the exact energy equivalents are derived from the fixed values.
 *
 * Conversions stay inside one kind of quantity. Energies include frequencies
 * (E = h f), angular frequencies (hbar omega), wavenumbers (h c / lambda),
 * temperatures (k_B T) and magnetic fields as Bohr-magneton energies (mu_B B,
 * units T, mT, uT, G); the magnetic field as such has its own kind (tesla,
 * gauss, au_bfield). Electric dipole moments are a kind of their own: the
 * debye (D) is 1e-21/c C m exactly by its definition (1e-18 statC cm; c the
 * exact SI value), and the atomic unit e a0 is the CODATA 2018 value
 * 8.4783536255e-30 C m, so 1 D = 0.393430... e a0.
 * All tables are static: no allocation, no state. */
#include <string.h>
#include "internal.h"

#define PI_ 3.14159265358979323846
#define C_ 299792458.0
#define H_ 6.62607015e-34
#define E_ 1.602176634e-19
#define KB_ 1.380649e-23
#define MUB_ 9.2740100783e-24
#define EH_ 4.3597447222071e-18
#define A0_ 5.29177210903e-11
#define EAU_ 5.14220674763e11
#define BAU_ 2.35051756758e5
#define DAU_ 8.4783536255e-30 /* atomic unit of electric dipole moment e a0, C m */
#define DEBYE_ (1e-21 / C_) /* debye, C m, exact by definition */

static const lvs_constant table[] = {
    /* exact (SI 2019) */
    {"c", C_, 0, "m s^-1", "speed of light in vacuum"},
    {"h", H_, 0, "J Hz^-1", "Planck constant"},
    {"hbar", H_ / (2 * PI_), 0, "J s", "reduced Planck constant (h / 2 pi)"},
    {"e", E_, 0, "C", "elementary charge"},
    {"k_B", KB_, 0, "J K^-1", "Boltzmann constant"},
    {"N_A", 6.02214076e23, 0, "mol^-1", "Avogadro constant"},
    /* recommended values */
    {"alpha", 7.2973525693e-3, 0.0000000011e-3, "", "fine-structure constant"},
    {"alpha_inv", 137.035999084, 0.000000021, "", "inverse fine-structure constant"},
    {"m_e", 9.1093837015e-31, 0.0000000028e-31, "kg", "electron mass"},
    {"m_p", 1.67262192369e-27, 0.00000000051e-27, "kg", "proton mass"},
    {"m_u", 1.66053906660e-27, 0.00000000050e-27, "kg", "atomic mass constant"},
    {"m_p_over_m_e", 1836.15267343, 0.00000011, "", "proton-electron mass ratio"},
    {"mu_B", MUB_, 0.0000000028e-24, "J T^-1", "Bohr magneton"},
    {"mu_B_Hz", 1.39962449361e10, 0.00000000042e10, "Hz T^-1", "Bohr magneton in Hz/T"},
    {"mu_B_K", 0.67171381563, 0.00000000020, "K T^-1", "Bohr magneton in K/T"},
    {"mu_B_eV", 5.7883818060e-5, 0.0000000017e-5, "eV T^-1", "Bohr magneton in eV/T"},
    {"mu_N", 5.0507837461e-27, 0.0000000015e-27, "J T^-1", "nuclear magneton"},
    {"mu_N_MHz", 7.6225932291, 0.0000000023, "MHz T^-1", "nuclear magneton in MHz/T"},
    {"a0", A0_, 0.00000000080e-11, "m", "Bohr radius"},
    {"E_h", EH_, 0.0000000000085e-18, "J", "Hartree energy"},
    {"E_h_eV", 27.211386245988, 0.000000000053, "eV", "Hartree energy in eV"},
    {"E_h_Hz", 6.579683920502e15, 0.000000000013e15, "Hz", "hartree-hertz relationship"},
    {"E_h_invm", 2.1947463136320e7, 0.0000000000043e7, "m^-1", "hartree-inverse meter relationship"},
    {"E_h_K", 3.1577502480407e5, 0.0000000000061e5, "K", "hartree-kelvin relationship"},
    {"R_inf", 10973731.568160, 0.000021, "m^-1", "Rydberg constant"},
    {"Ry_eV", 13.605693122994, 0.000000000026, "eV", "Rydberg constant times hc in eV"},
    {"g_e", -2.00231930436256, 0.00000000000035, "", "electron g factor"},
    {"g_p", 5.5856946893, 0.0000000016, "", "proton g factor"},
    {"gamma_e_MHz", 28024.9514242, 0.0000085, "MHz T^-1", "electron gyromagnetic ratio over 2 pi"},
    {"m_e_c2", 8.1871057769e-14, 0.0000000025e-14, "J", "electron mass energy equivalent"},
    {"m_e_c2_MeV", 0.51099895000, 0.00000000015, "MeV", "electron mass energy equivalent in MeV"},
    {"au_time", 2.4188843265857e-17, 0.0000000000047e-17, "s", "atomic unit of time"},
    {"au_efield", EAU_, 0.00000000078e11, "V m^-1", "atomic unit of electric field"},
    {"au_bfield", BAU_, 0.00000000071e5, "T", "atomic unit of magnetic flux density"},
    {"au_dipole", DAU_, 0.0000000013e-30, "C m", "atomic unit of electric dipole moment"},
    {"mu_0", 1.25663706212e-6, 0.00000000019e-6, "N A^-2", "vacuum magnetic permeability"},
    {"eps_0", 8.8541878128e-12, 0.0000000013e-12, "F m^-1", "vacuum electric permittivity"},
};
#define NCONST (sizeof table / sizeof table[0])

typedef struct {
  const char *name;
  const char *kind;
  double si; /* size of one unit in the kind's SI unit (J, V/m, m, T, C m) */
} unit;

static const char K_E[] = "energy", K_F[] = "electric field", K_L[] = "length", K_B[] = "magnetic field",
                  K_D[] = "dipole";

static const unit units[] = {
    {"hartree", K_E, EH_}, {"Eh", K_E, EH_}, {"eV", K_E, E_}, {"meV", K_E, 1e-3 * E_},
    {"ueV", K_E, 1e-6 * E_}, {"J", K_E, 1}, {"cm^-1", K_E, 100 * H_ * C_}, {"cm-1", K_E, 100 * H_ * C_},
    {"m^-1", K_E, H_ * C_}, {"Hz", K_E, H_}, {"kHz", K_E, 1e3 * H_}, {"MHz", K_E, 1e6 * H_},
    {"GHz", K_E, 1e9 * H_}, {"THz", K_E, 1e12 * H_}, {"rad/s", K_E, H_ / (2 * PI_)},
    {"K", K_E, KB_}, {"mK", K_E, 1e-3 * KB_},
    {"T", K_E, MUB_}, {"mT", K_E, 1e-3 * MUB_}, {"uT", K_E, 1e-6 * MUB_}, {"G", K_E, 1e-4 * MUB_},
    {"V/m", K_F, 1}, {"V/cm", K_F, 100}, {"kV/cm", K_F, 1e5}, {"au_field", K_F, EAU_},
    {"m", K_L, 1}, {"cm", K_L, 1e-2}, {"mm", K_L, 1e-3}, {"um", K_L, 1e-6}, {"nm", K_L, 1e-9},
    {"pm", K_L, 1e-12}, {"angstrom", K_L, 1e-10}, {"bohr", K_L, A0_},
    {"tesla", K_B, 1}, {"gauss", K_B, 1e-4}, {"au_bfield", K_B, BAU_},
    {"D", K_D, DEBYE_}, {"debye", K_D, DEBYE_}, {"ea0", K_D, DAU_}, {"au_dipole", K_D, DAU_},
    {"C*m", K_D, 1},
};
#define NUNITS (sizeof units / sizeof units[0])

LVS_API const lvs_constant *lvs_constant_at(size_t i) { return i < NCONST ? &table[i] : NULL; }

LVS_API const lvs_constant *lvs_constant_find(const char *name) {
  if (!name) return NULL;
  for (size_t i = 0; i < NCONST; i++)
    if (strcmp(table[i].name, name) == 0) return &table[i];
  return NULL;
}

static const unit *find_unit(const char *name) {
  if (!name) return NULL;
  for (size_t i = 0; i < NUNITS; i++)
    if (strcmp(units[i].name, name) == 0) return &units[i];
  return NULL;
}

LVS_API const char *lvs_unit_at(size_t i, const char **kind) {
  if (i >= NUNITS) return NULL;
  if (kind) *kind = units[i].kind;
  return units[i].name;
}

LVS_API const char *lvs_unit_kind(const char *name) {
  const unit *u = find_unit(name);
  return u ? u->kind : NULL;
}

LVS_API int lvs_unit_convert(lvs_ctx *ctx, double value, const char *from, const char *to, double *out) {
  if (!out) return lvsi_fail(ctx, LVS_EINVAL, "unit_convert: out is NULL");
  const unit *a = find_unit(from), *b = find_unit(to);
  if (!a) return lvsi_fail(ctx, LVS_EINVAL, "unknown unit '%s'", from ? from : "(null)");
  if (!b) return lvsi_fail(ctx, LVS_EINVAL, "unknown unit '%s'", to ? to : "(null)");
  if (a->kind != b->kind)
    return lvsi_fail(ctx, LVS_EINVAL, "cannot convert %s '%s' to %s '%s'", a->kind, a->name, b->kind, b->name);
  *out = (a == b) ? value : value * (a->si / b->si);
  return LVS_OK;
}
