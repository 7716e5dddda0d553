"""Standard atomic weights.

Values are the abridged standard atomic weights of IUPAC (Prohaska et al.,
"Standard atomic weights of the elements 2021 (IUPAC Technical Report)",
Pure Appl. Chem. 94, 573–600, 2022), Table 2, in [u].  Where IUPAC gives an
interval, the conventional value of that table is used.  Radioactive elements
without a standard atomic weight carry the mass number of their longest-lived
isotope (bracketed in the IUPAC table).
"""

from __future__ import annotations

from pipeline.codata import C

#: symbol → standard atomic weight [u]
ATOMIC_WEIGHT: dict[str, float] = {
    "H": 1.0080, "He": 4.0026, "Li": 6.94, "Be": 9.0122, "B": 10.81,
    "C": 12.011, "N": 14.007, "O": 15.999, "F": 18.998, "Ne": 20.180,
    "Na": 22.990, "Mg": 24.305, "Al": 26.982, "Si": 28.085, "P": 30.974,
    "S": 32.06, "Cl": 35.45, "Ar": 39.95, "K": 39.098, "Ca": 40.078,
    "Sc": 44.956, "Ti": 47.867, "V": 50.942, "Cr": 51.996, "Mn": 54.938,
    "Fe": 55.845, "Co": 58.933, "Ni": 58.693, "Cu": 63.546, "Zn": 65.38,
    "Ga": 69.723, "Ge": 72.630, "As": 74.922, "Se": 78.971, "Br": 79.904,
    "Kr": 83.798, "Rb": 85.468, "Sr": 87.62, "Y": 88.906, "Zr": 91.224,
    "Nb": 92.906, "Mo": 95.95, "Tc": 98.0, "Ru": 101.07, "Rh": 102.91,
    "Pd": 106.42, "Ag": 107.87, "Cd": 112.41, "In": 114.82, "Sn": 118.71,
    "Sb": 121.76, "Te": 127.60, "I": 126.90, "Xe": 131.29, "Cs": 132.91,
    "Ba": 137.33, "La": 138.91, "Ce": 140.12, "Hf": 178.49, "Ta": 180.95,
    "W": 183.84, "Re": 186.21, "Os": 190.23, "Ir": 192.22, "Pt": 195.08,
    "Au": 196.97, "Hg": 200.59, "Tl": 204.38, "Pb": 207.2, "Bi": 208.98,
    "Rn": 222.0, "Th": 232.04, "U": 238.03,
}

#: electron mass [u] (CODATA, via scipy.constants)
ELECTRON_MASS_U = C.m_e / C.atomic_mass


def formula_mass(formula: dict[str, int], charge: int = 0) -> float:
    """Molar mass of a formula [u] from standard atomic weights.

    M = Σ n_i A_r(i) − z m_e

    Parameters
    ----------
    formula : dict
        Element symbol → count.
    charge : int
        Net charge z in elementary charges (+1 removes one electron).

    Returns
    -------
    Molecular mass [u].

    Examples
    --------
    >>> round(formula_mass({"H": 2, "O": 1}), 3)
    18.015

    Reference: IUPAC standard atomic weights 2021 (Prohaska et al. 2022).
    """
    return sum(ATOMIC_WEIGHT[el] * n for el, n in formula.items()) - charge * ELECTRON_MASS_U


#: H°(298.15 K) − H°(0) of each element in its reference state, per atom
#: [J/mol], from the CODATA key values (Cox, Wagman & Medvedev, *CODATA Key
#: Values for Thermodynamics*, Hemisphere, 1989).  Diatomic reference gases
#: (H2, N2, O2, F2, Cl2) and Br2(l), I2(cr) are halved per atom.  H, C, N, O
#: are the values the core database relies on; the others were transcribed
#: for completeness and should be checked against the table before use.
ELEMENT_H298_H0: dict[str, float] = {
    "H": 8468.0 / 2, "He": 6197.0, "Li": 4632.0, "Be": 1950.0, "B": 1222.0,
    "C": 1051.0, "N": 8670.0 / 2, "O": 8683.0 / 2, "F": 8825.0 / 2, "Ne": 6197.0,
    "Na": 6460.0, "Mg": 4998.0, "Al": 4540.0, "Si": 3217.0, "P": 5360.0,
    "S": 4412.0, "Cl": 9181.0 / 2, "Ar": 6197.0, "K": 7088.0, "Ca": 5736.0,
    "Ti": 4824.0, "Cu": 5004.0, "Zn": 5657.0, "Ge": 4636.0, "Br": 24513.0 / 2,
    "Kr": 6197.0, "Rb": 7489.0, "Ag": 5745.0, "Cd": 6247.0, "Sn": 6323.0,
    "I": 13196.0 / 2, "Xe": 6197.0, "Cs": 7717.0, "Hg": 9342.0, "Pb": 6870.0,
    "U": 6364.0,
}
