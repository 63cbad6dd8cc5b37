"""Absolute crystallinity from the DSC enthalpy and the 100 %-crystalline enthalpy.

    x_c = Delta H / ((1 - w_f) Delta H_100)

with Delta H the measured specific enthalpy of the sample (J/kg of sample),
w_f the mass fraction of filler (or any non-crystallizing component) and
Delta H_100 the enthalpy of fusion of the fully crystalline polymer (J/kg).

The table :data:`DELTA_H100` holds values in J/kg (converted from the J/g of
the literature), each with its source and status: "confirmed" where a
published copy was seen, "from memory" where the original was not seen. The
first entry of each polymer is the default; alternatives follow. Reported
values differ between authors by up to 20 % (PET 140 or 166 J/g, PEEK 130 or
122.5 J/g), so a result always records which value it used.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CrystkinInputError, check_range

__all__ = ["ReferenceEnthalpy", "AbsoluteCrystallinity", "DELTA_H100", "reference_enthalpy",
           "absolute_crystallinity"]


@dataclass(frozen=True)
class ReferenceEnthalpy:
    """Enthalpy of fusion of a 100 % crystalline polymer.

    Attributes
    ----------
    polymer : str
    value : float, J/kg
    source : str
    status : {"confirmed", "from memory"}
    note : str
    """

    polymer: str
    value: float
    source: str
    status: str
    note: str = ""

    @property
    def value_J_per_g(self) -> float:
        return self.value / 1e3


def _e(polymer, j_per_g, source, status, note=""):
    return ReferenceEnthalpy(polymer, j_per_g * 1e3, source, status, note)


_WUNDERLICH_1990 = "Wunderlich, Thermal Analysis (Academic Press, 1990) 417-431 (seen cited)"

#: 100 %-crystalline enthalpies of fusion, J/kg; first entry per polymer is the default.
DELTA_H100: dict[str, tuple[ReferenceEnthalpy, ...]] = {
    "PE": (_e("PE", 293.0, _WUNDERLICH_1990, "confirmed", "4.11 kJ/mol"),
           _e("PE", 307.0, "Atkinson & Richardson, Trans. Faraday Soc. 65 (1969) 1764",
              "confirmed", "at the melting point")),
    "iPP": (_e("iPP", 207.0, _WUNDERLICH_1990, "confirmed"),),
    "POM": (_e("POM", 326.0, _WUNDERLICH_1990, "confirmed"),),
    "PA6": (_e("PA6", 230.0, _WUNDERLICH_1990, "confirmed"),),
    "PET": (_e("PET", 140.0, "Wunderlich", "from memory"),
            _e("PET", 166.0, "Illers", "confirmed", "crystal specific volume 0.660 cm3/g")),
    "PEEK": (_e("PEEK", 130.0, "Blundell & Osborn 1983", "from memory"),
             _e("PEEK", 122.5, "Mehmet-Alkan & Hay, Polymer 33 (1992) 3527", "confirmed",
                "+/- 1.5 J/g")),
    "PLLA": (_e("PLLA", 93.0, "Fischer, Sterzel & Wegner 1973", "from memory",
                "contested: literature range 82-203 J/g (Righetti et al., Eur. Polym. J. 70 "
                "(2015) 215)"),
             _e("PLLA", 106.0, "Kricheldorf et al. 2022, RSC Mater. Adv.", "confirmed")),
    "PCL": (_e("PCL", 139.5, "Crescenzi 1972", "from memory"),),
    "PBT": (_e("PBT", 140.0, "Illers", "confirmed"),),
    "PVDF": (_e("PVDF", 104.7, "Nakagawa & Ishida 1973", "from memory"),),
}

_ALIASES = {
    "pe": "PE", "hdpe": "PE", "polyethylene": "PE",
    "ipp": "iPP", "pp": "iPP", "polypropylene": "iPP", "isotactic polypropylene": "iPP",
    "pom": "POM", "polyoxymethylene": "POM", "pa6": "PA6", "pa 6": "PA6", "nylon 6": "PA6",
    "nylon6": "PA6", "pet": "PET", "peek": "PEEK", "plla": "PLLA", "pla": "PLLA",
    "pcl": "PCL", "polycaprolactone": "PCL", "pbt": "PBT", "pvdf": "PVDF",
}


@dataclass(frozen=True)
class AbsoluteCrystallinity:
    """Mass-fraction crystallinity and the reference enthalpy it used.

    Attributes
    ----------
    value : float
        Crystalline mass fraction of the polymer (0 to 1 for consistent inputs).
    enthalpy : float, J/kg
        Measured specific enthalpy of the sample.
    delta_h100 : float, J/kg
    reference : str
        Source of ``delta_h100`` ("given" when passed as a number).
    status : str
    filler_fraction : float
    """

    value: float
    enthalpy: float
    delta_h100: float
    reference: str
    status: str
    filler_fraction: float

    def __float__(self) -> float:
        return float(self.value)


def reference_enthalpy(polymer: str, *, source: str | None = None) -> ReferenceEnthalpy:
    """The tabulated 100 %-crystalline enthalpy of ``polymer``.

    Parameters
    ----------
    polymer : str
        Name or abbreviation ("iPP", "PP", "polypropylene", ...; case ignored).
    source : str, optional
        Pick the alternative whose source contains this text (for example
        "Illers" for PET); default the first entry.

    Raises
    ------
    CrystkinInputError
        Unknown polymer or source.
    """
    key = _ALIASES.get(str(polymer).strip().lower())
    if key is None:
        raise CrystkinInputError(
            f"no tabulated 100 % crystalline enthalpy for polymer '{polymer}'; known: "
            f"{', '.join(DELTA_H100)}. Give delta_h100 in J/kg (or 'delta_h100 = \"... J/g\"' "
            "in the study file)")
    entries = DELTA_H100[key]
    if source is None:
        return entries[0]
    for e in entries:
        if source.lower() in e.source.lower():
            return e
    raise CrystkinInputError(
        f"no 100 % crystalline enthalpy of {key} from '{source}'; available: "
        + "; ".join(f"{e.value_J_per_g:g} J/g ({e.source})" for e in entries))


def absolute_crystallinity(enthalpy_J_per_kg, *, polymer=None, delta_h100=None,
                           filler_fraction=0.0) -> AbsoluteCrystallinity:
    """Crystalline mass fraction of the polymer from a DSC enthalpy.

    Parameters
    ----------
    enthalpy_J_per_kg : float, J/kg
        Measured crystallization (or fusion) enthalpy per kg of sample, positive.
    polymer : str, optional
        Looks up :data:`DELTA_H100` (default entry) when ``delta_h100`` is not given.
    delta_h100 : float, J/kg, optional
        Enthalpy of the 100 % crystalline polymer; wins over ``polymer``.
    filler_fraction : float
        Mass fraction w_f of filler in the sample, 0 <= w_f < 1.

    Returns
    -------
    AbsoluteCrystallinity
        ``value`` = Delta H / ((1 - w_f) Delta H_100), with the reference used.

    Notes
    -----
    x_c = Delta H / ((1 - w_f) Delta H_100): the measured heat per kg of sample
    is referred to the polymer part, 1 - w_f of the mass.

    References
    ----------
    Wunderlich, B. Thermal Analysis, Academic Press (1990), for the iPP, PE, POM
    and PA6 values of Delta H_100.

    Examples
    --------
    >>> round(absolute_crystallinity(98e3, polymer="iPP").value, 4)
    0.4734
    """
    where = "absolute_crystallinity"
    dh = float(enthalpy_J_per_kg)
    if not np.isfinite(dh) or dh < 0:
        raise CrystkinInputError(
            f"The 'enthalpy_J_per_kg' parameter of {where} must be a positive enthalpy in J/kg. "
            f"Got {enthalpy_J_per_kg!r} instead.")
    check_range("filler_fraction", float(filler_fraction), where, lower=0.0)
    if not float(filler_fraction) < 1.0:
        raise CrystkinInputError(
            f"The 'filler_fraction' parameter of {where} must be in [0, 1). "
            f"Got {filler_fraction!r} instead.")
    if delta_h100 is not None:
        ref_value, ref_source, status = float(delta_h100), "given", "given"
        if not ref_value > 0:
            raise CrystkinInputError(
                f"The 'delta_h100' parameter of {where} must be positive, in J/kg. "
                f"Got {delta_h100!r} instead.")
    elif polymer is not None:
        ref = reference_enthalpy(polymer)
        ref_value, ref_source, status = ref.value, ref.source, ref.status
    else:
        raise CrystkinInputError(
            f"{where} needs delta_h100 (J/kg) or a polymer name with a tabulated value")
    value = dh / ((1.0 - float(filler_fraction)) * ref_value)
    return AbsoluteCrystallinity(float(value), dh, ref_value, ref_source, status,
                                 float(filler_fraction))
