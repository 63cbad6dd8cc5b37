"""Polymer and physical constants for growth theory, melting and crystallinity, with sources.

Every tabulated value is SI (K, J/mol, J/m^2, J/m^3, kg/m^3, m, rad) and carries its
source and a status:

* ``"confirmed"``: seen in a published copy (the source is named);
* ``"derived"``: computed from other values and checked numerically;
* ``"from memory"``: the original was not seen; verify before relying on it.

Published values differ between authors (Tm0 of polyethylene 414-419 K, of
isotactic polypropylene 459-485 K), so analyses take constants as explicit inputs
and record which ones they used; this table is a starting point, not an authority.
The first entry of a polymer's constant is its default; alternatives follow.

The 100 %-crystalline enthalpies of fusion per mass (J/kg) live in
:mod:`kinetics.prep.crystallinity`, not here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy import constants as _sc

from .errors import CrystkinInputError

__all__ = [
    "Constant", "UnitCell", "R", "K_B", "N_A", "U_STAR_DEFAULT", "T_INF_OFFSET",
    "THOMAS_STAVELEY_ALPHA", "CU_KALPHA1", "POLYMER_CONSTANTS", "UNIT_CELLS",
    "canonical_polymer", "polymer_constant", "polymer_constants", "unit_cell", "default_T_inf",
    "CONSTANT_NAMES",
]

#: Molar gas constant, J/(mol K) (CODATA, via scipy.constants).
R = float(_sc.R)
#: Boltzmann constant, J/K (CODATA, via scipy.constants).
K_B = float(_sc.k)
#: Avogadro constant, 1/mol (CODATA, via scipy.constants).
N_A = float(_sc.N_A)

STATUSES = ("confirmed", "derived", "from memory")


@dataclass(frozen=True)
class Constant:
    """One tabulated value with its provenance.

    Attributes
    ----------
    name : str
        Key in :data:`POLYMER_CONSTANTS` (``Tm0``, ``Tg``, ``b0``, ...).
    value : float
        In the SI unit ``unit``.
    unit : str
    source : str
    status : {"confirmed", "derived", "from memory"}
    note : str
    """

    name: str
    value: float
    unit: str
    source: str
    status: str
    note: str = ""

    def __post_init__(self):
        if self.status not in STATUSES:
            raise ValueError(f"status of {self.name} must be one of {STATUSES}")

    def __float__(self) -> float:
        return float(self.value)

    def describe(self) -> str:
        s = f"{self.name} = {self.value:.6g} {self.unit} ({self.source}; {self.status})"
        return s + (f"; {self.note}" if self.note else "")


@dataclass(frozen=True)
class UnitCell:
    """Crystallographic unit cell of a polymer crystal.

    Attributes
    ----------
    polymer, form : str
    system : str
        Crystal system ("orthorhombic", "monoclinic", ...).
    a, b, c : float, m
    alpha, beta, gamma : float, rad
    z : float
        Repeat units per cell.
    repeat_unit : str
    molar_mass : float, kg/mol
        Molar mass of one repeat unit.
    source, status, note : str
    """

    polymer: str
    form: str
    system: str
    a: float
    b: float
    c: float
    alpha: float
    beta: float
    gamma: float
    z: float
    repeat_unit: str
    molar_mass: float
    source: str
    status: str
    note: str = ""


_HOFFMAN_MILLER = "Hoffman & Miller, Polymer 38 (1997) 3151-3212"
_ANGSTROM = 1e-10
_ERG_PER_CM2 = 1e-3  # J/m^2
_DEG = math.pi / 180.0

#: U* = 1500 cal/mol (thermochemical calorie, 4.184 J), the usual published default, J/mol.
U_STAR_DEFAULT = Constant(
    "U_star", 1500.0 * 4.184, "J/mol",
    "usual published default of Hoffman-Lauritzen analyses, 1500 cal/mol (Hoffman & Miller 1997)",
    "derived", "1500 cal/mol = 6276 J/mol; '6270 J/mol' is a rounding; the 1500 cal/mol value "
    "itself from memory")
#: T_inf = Tg - 30 K, K.
T_INF_OFFSET = Constant(
    "T_inf_offset", 30.0, "K", "Guo, Isayev & Guo, Polym. Eng. Sci. 39 (1999) 2096 (seen quoted)",
    "confirmed", "T_inf = Tg - 30 K; weak source")
#: Thomas-Staveley constant alpha in sigma = alpha dh_f (a0 b0)^(1/2).
THOMAS_STAVELEY_ALPHA = (
    Constant("alpha", 0.1, "1", "Thomas & Staveley, J. Chem. Soc. 1952, 4569", "from memory",
             "the usual choice for vinyl polymers"),
    Constant("alpha", 0.25, "1", "Chen & Chung, J. Polym. Sci. B 36 (1998) 2393", "confirmed",
             "argued for PEEK (rather than 0.1 or 0.3)"),
)
#: Cu K-alpha1 wavelength, m.
CU_KALPHA1 = Constant("wavelength", 0.15406e-9, "m", "Cu K-alpha1 (1.540593 Angstrom)",
                      "from memory")


def _c(name, value, unit, source, status, note=""):
    return Constant(name, float(value), unit, source, status, note)


#: Names and SI units of the per-polymer constants.
CONSTANT_NAMES = {
    "Tm0": "K", "Tg": "K", "delta_hf": "J/m^3", "a0": "m", "b0": "m", "sigma": "J/m^2",
    "sigma_e": "J/m^2", "rho_c": "kg/m^3", "rho_a": "kg/m^3", "T_I_II": "K", "T_II_III": "K",
    "dT_I_II": "K", "dT_II_III": "K", "alpha_TS": "1",
}

#: Per-polymer constants: name -> tuple of Constant, the first the default.
POLYMER_CONSTANTS: dict[str, dict[str, tuple[Constant, ...]]] = {
    "PE": {
        "Tm0": (_c("Tm0", 418.7, "K", _HOFFMAN_MILLER, "from memory",
                   "145.5 degC, Hoffman's choice; other sources give 414-415 K"),
                _c("Tm0", 414.75, "K", "Flory & Vrij, Trans. Faraday Soc. 65 (1969) 1749",
                   "confirmed", "141.6 degC, extrapolation of n-alkane melting points"),
                _c("Tm0", 414.15, "K", "Atkinson & Richardson, Trans. Faraday Soc. 65 (1969)",
                   "confirmed", "141 +/- 1 degC")),
        "Tg": (_c("Tg", 237.0, "K", "ATHAS data bank", "from memory", "about -120 degC"),),
        "delta_hf": (_c("delta_hf", 2.80e8, "J/m^3", _HOFFMAN_MILLER, "from memory",
                        "heat of fusion per crystal volume"),),
        "a0": (_c("a0", 4.55 * _ANGSTROM, "m", _HOFFMAN_MILLER, "from memory",
                  "stem width"),),
        "b0": (_c("b0", 4.15 * _ANGSTROM, "m", _HOFFMAN_MILLER, "from memory",
                  "layer thickness"),),
        "sigma": (_c("sigma", 11.8 * _ERG_PER_CM2, "J/m^2", _HOFFMAN_MILLER, "from memory",
                     "lateral surface free energy, 11.8 erg/cm^2"),),
        "sigma_e": (_c("sigma_e", 90.0 * _ERG_PER_CM2, "J/m^2", _HOFFMAN_MILLER, "from memory",
                       "fold surface free energy, 90 erg/cm^2; depends on molar mass"),),
        "rho_c": (_c("rho_c", 1000.0, "kg/m^3", "commonly used value", "from memory",
                     "1.00 g/cm^3"),
                  _c("rho_c", 1008.0, "kg/m^3", "Bunn's unit cell (Trans. Faraday Soc. 35 "
                     "(1939) 482)", "derived", "with a = 7.40, b = 4.93, c = 2.534 Angstrom"),
                  _c("rho_c", 997.0, "kg/m^3", "paraffin-like axes 7.417/4.945/2.547 Angstrom",
                     "derived")),
        "rho_a": (_c("rho_a", 855.0, "kg/m^3", "commonly used value", "from memory",
                     "0.855 g/cm^3 at 25 degC"),),
        "dT_I_II": (_c("dT_I_II", 17.0, "K", _HOFFMAN_MILLER, "from memory",
                       "undercooling of the regime I -> II transition"),),
        "dT_II_III": (_c("dT_II_III", 23.0, "K", _HOFFMAN_MILLER, "from memory",
                         "undercooling of the regime II -> III transition"),),
    },
    "iPP": {
        "Tm0": (_c("Tm0", 459.25, "K", "Yamada et al., Macromolecules 36 (2003) 4802-4812",
                   "confirmed", "186.1 degC from Gibbs-Thomson; the Hoffman-Weeks plot is "
                   "invalid for iPP"),
                _c("Tm0", 483.15, "K", "other studies", "from memory",
                   "210 degC, middle of the 208-212 degC reported")),
        "Tg": (_c("Tg", 254.0, "K", "NIST Chemistry WebBook", "derived",
                  "middle of the 249-259 K range given there"),),
        "T_II_III": (_c("T_II_III", 410.15, "K",
                        "Clark & Hoffman, Macromolecules 17 (1984) 878-885", "from memory",
                        "regime II -> III at about 137 degC"),),
    },
    "PET": {
        "Tm0": (_c("Tm0", 553.0, "K", "handbook value", "from memory", "about 280 degC"),),
        "Tg": (_c("Tg", 348.0, "K", "handbook value", "from memory",
                  "middle of 70-80 degC"),),
        "a0": (_c("a0", 4.56 * _ANGSTROM, "m", "Palys & Phillips 1980, as quoted by others",
                  "confirmed", "seen only as a citation snippet"),),
        "b0": (_c("b0", 5.53 * _ANGSTROM, "m", "Palys & Phillips 1980, as quoted by others",
                  "confirmed", "seen only as a citation snippet"),),
        "sigma": (_c("sigma", 1.2e-2, "J/m^2", "Palys & Phillips 1980, as quoted by others",
                     "confirmed", "seen only as a citation snippet"),),
        "sigma_e": (_c("sigma_e", 6.3e-2, "J/m^2", "Palys & Phillips 1980, as quoted by others",
                       "confirmed", "6.3-7.5e-2 J/m^2 quoted; seen only as a citation snippet"),),
        "delta_hf": (_c("delta_hf", 2.1e8, "J/m^3", "Palys & Phillips 1980, as quoted by others",
                        "confirmed", "140 J/g x 1.5 g/cm^3; seen only as a citation snippet"),),
    },
    "PLLA": {
        "Tm0": (_c("Tm0", 480.15, "K", "handbook value", "from memory", "207 degC"),
                _c("Tm0", 486.15, "K", "Kricheldorf et al. 2022, RSC Mater. Adv.", "confirmed",
                   "213 +/- 2 degC")),
        "Tg": (_c("Tg", 330.65, "K", "handbook value", "from memory", "middle of 55-60 degC"),),
    },
    "PCL": {
        "Tm0": (_c("Tm0", 376.15, "K", "flash-DSC Gibbs-Thomson study (Virginia Tech thesis)",
                   "confirmed", "103 degC; conventional values are 69-80 degC"),
                _c("Tm0", 353.15, "K", "conventional Hoffman-Weeks values", "from memory",
                   "80 degC, top of the 69-80 degC range")),
        "Tg": (_c("Tg", 213.15, "K", "handbook value", "confirmed", "about -60 degC; weak "
                  "source"),),
    },
    "PEEK": {
        "T_II_III": (_c("T_II_III", 569.15, "K", "Chen & Chung, J. Polym. Sci. B 36 (1998) 2393",
                        "confirmed", "regime II -> III at 296 degC"),),
        "alpha_TS": (THOMAS_STAVELEY_ALPHA[1],),
    },
}

#: Unit cells: polymer -> UnitCell.
UNIT_CELLS: dict[str, UnitCell] = {
    "PE": UnitCell("PE", "orthorhombic", "orthorhombic", 7.40 * _ANGSTROM, 4.93 * _ANGSTROM,
                   2.534 * _ANGSTROM, 90 * _DEG, 90 * _DEG, 90 * _DEG, 4, "CH2", 14.027e-3,
                   "Bunn, Trans. Faraday Soc. 35 (1939) 482-491", "from memory",
                   "space group Pnam, 4 CH2 per cell (two chains); paraffin subcell "
                   "4.945 x 7.42 x 2.546 Angstrom confirmed by Shearer & Vand, Acta Cryst. 9 "
                   "(1956) 379"),
    "iPP": UnitCell("iPP", "alpha", "monoclinic", 6.65 * _ANGSTROM, 20.96 * _ANGSTROM,
                    6.50 * _ANGSTROM, 90 * _DEG, 99.3 * _DEG, 90 * _DEG, 12, "C3H6", 42.081e-3,
                    "Natta & Corradini, Nuovo Cimento Suppl. 15 (1960) 40", "from memory",
                    "alpha form, 4 chains of 3 monomers per cell; not checked against the paper"),
}

_ALIASES = {
    "pe": "PE", "hdpe": "PE", "polyethylene": "PE",
    "ipp": "iPP", "pp": "iPP", "polypropylene": "iPP", "isotactic polypropylene": "iPP",
    "pet": "PET", "poly(ethylene terephthalate)": "PET",
    "plla": "PLLA", "pla": "PLLA", "poly(l-lactide)": "PLLA",
    "pcl": "PCL", "polycaprolactone": "PCL", "peek": "PEEK",
}


def canonical_polymer(polymer: str) -> str:
    """Table key of a polymer name or abbreviation ("PP", "polypropylene" -> "iPP").

    Raises
    ------
    CrystkinInputError
        Unknown polymer.
    """
    key = _ALIASES.get(str(polymer).strip().lower())
    if key is None:
        raise CrystkinInputError(
            f"no tabulated constants for polymer '{polymer}'; known: "
            f"{', '.join(POLYMER_CONSTANTS)}. Give the constants explicitly (in SI units)")
    return key


def polymer_constant(polymer: str, name: str, *, source: str | None = None) -> Constant:
    """One tabulated constant of a polymer.

    Parameters
    ----------
    polymer : str
        Name or abbreviation (case ignored).
    name : str
        One of :data:`CONSTANT_NAMES` (``Tm0``, ``Tg``, ``delta_hf``, ``a0``, ``b0``,
        ``sigma``, ``sigma_e``, ``rho_c``, ``rho_a``, ...).
    source : str, optional
        Pick the alternative whose source contains this text; default the first entry.

    Returns
    -------
    Constant

    Raises
    ------
    CrystkinInputError
        Unknown polymer, a constant not tabulated for it, or no entry from ``source``.
    """
    key = canonical_polymer(polymer)
    if name not in CONSTANT_NAMES:
        raise CrystkinInputError(
            f"unknown constant '{name}'; known: {', '.join(CONSTANT_NAMES)}")
    entries = POLYMER_CONSTANTS[key].get(name)
    if not entries:
        have = ", ".join(POLYMER_CONSTANTS[key]) or "none"
        raise CrystkinInputError(
            f"no tabulated {name} for {key} (tabulated: {have}); give it explicitly in "
            f"{CONSTANT_NAMES[name]}")
    if source is None:
        return entries[0]
    for e in entries:
        if source.lower() in e.source.lower():
            return e
    raise CrystkinInputError(
        f"no {name} of {key} from '{source}'; available: "
        + "; ".join(f"{e.value:.6g} {e.unit} ({e.source})" for e in entries))


def polymer_constants(polymer: str) -> dict[str, Constant]:
    """The default (first) entry of every constant tabulated for a polymer."""
    key = canonical_polymer(polymer)
    return {name: entries[0] for name, entries in POLYMER_CONSTANTS[key].items()}


def unit_cell(polymer: str) -> UnitCell:
    """Tabulated unit cell of a polymer's usual crystal form.

    Raises
    ------
    CrystkinInputError
        No cell tabulated.
    """
    key = canonical_polymer(polymer)
    if key not in UNIT_CELLS:
        raise CrystkinInputError(
            f"no tabulated unit cell for {key} (tabulated: {', '.join(UNIT_CELLS)}); give the "
            "lattice parameters explicitly")
    return UNIT_CELLS[key]


def default_T_inf(Tg: float) -> float:
    """T_inf = Tg - 30 K, the usual default of Hoffman-Lauritzen analyses, K.

    References
    ----------
    Guo, Isayev & Guo, Polym. Eng. Sci. 39 (1999) 2096 (seen quoted).
    """
    return float(Tg) - T_INF_OFFSET.value
