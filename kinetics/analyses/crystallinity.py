"""Absolute crystallinity of a sample: from DSC enthalpy, density or WAXD peak areas.

* DSC: x_c = dH / ((1 - w_f) dH_100), with the cited 100 %-crystalline enthalpies of
  :mod:`kinetics.prep.crystallinity`;
* density (two-phase model): X_c = rho_c (rho - rho_a) / (rho (rho_c - rho_a)),
  crystal and amorphous densities with their sources from :mod:`kinetics.constants`
  or given;
* WAXD: X_c = A_c / (A_c + A_a) from the integrated crystalline reflections and
  amorphous halo;
* the crystal density of a unit cell from its lattice parameters, and mass <-> volume
  fraction conversion, V_c = W_c / [W_c + (rho_c/rho_a)(1 - W_c)].

Given SDs of the measured inputs are carried through by drawing them (Normal) and
computing every result per draw; reference values (dH_100, rho_c, rho_a) are taken as
exact and named with their source and status.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..constants import UnitCell, polymer_constant, unit_cell
from ..errors import CrystkinInputError
from ..estimate import interval_columns
from ..models.growth import (
    crystal_density,
    density_crystallinity,
    mass_to_volume_fraction,
    waxd_crystallinity,
)

__all__ = ["CrystallinityResult", "crystallinity_from_enthalpy", "crystallinity_from_density",
           "crystallinity_from_waxd", "unit_cell_density", "crystallinity_table"]


@dataclass(frozen=True)
class CrystallinityResult:
    """Crystallinity of one sample by one method.

    Attributes
    ----------
    method : {"DSC enthalpy", "density", "WAXD"}
    mass_fraction : ndarray
        Draws (or a single value) of the crystalline mass fraction.
    volume_fraction : ndarray or None
        The same as a volume fraction, when rho_c and rho_a are known.
    references : dict
        Reference values used, each with source and status.
    inputs : dict
        The measured inputs (SI).
    flags : tuple of str
    sample : str
    """

    method: str
    mass_fraction: np.ndarray
    volume_fraction: np.ndarray | None
    references: dict = field(default_factory=dict)
    inputs: dict = field(default_factory=dict)
    flags: tuple[str, ...] = ()
    sample: str = ""

    def table(self) -> pd.DataFrame:
        r = {"sample": self.sample, "method": self.method}
        r.update(interval_columns("X_c_mass", self.mass_fraction))
        r.update(interval_columns("X_c_volume", self.volume_fraction
                                  if self.volume_fraction is not None else [np.nan]))
        for k, v in self.inputs.items():
            r[k] = v
        r["references"] = "; ".join(f"{k}: {v}" for k, v in self.references.items())
        r["flags"] = "; ".join(self.flags)
        return pd.DataFrame([r])


def crystallinity_table(results) -> pd.DataFrame:
    """Rows of several :class:`CrystallinityResult` objects in one table."""
    frames = [r.table() for r in results]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def _draws(value, sd, rng, n, name, where, *, positive=True):
    v = float(value)
    if not np.isfinite(v) or (positive and not v > 0):
        raise CrystkinInputError(f"The '{name}' parameter of {where} must be a positive number "
                                 f"(SI units). Got {value!r} instead.")
    s = float(sd or 0.0)
    if not (np.isfinite(s) and s >= 0):
        raise CrystkinInputError(f"The '{name}_sd' parameter of {where} must be a non-negative "
                                 f"number. Got {sd!r} instead.")
    return np.array([v]) if s == 0 else rng.normal(v, s, n)


def _densities(rho_c, rho_a, polymer, where):
    refs = {}
    out = []
    for name, val in (("rho_c", rho_c), ("rho_a", rho_a)):
        if val is None:
            if polymer is None:
                out.append(None)
                continue
            c = polymer_constant(polymer, name)
            refs[name] = c.describe()
            out.append(c.value)
        else:
            v = float(val)
            if not (np.isfinite(v) and v > 0):
                raise CrystkinInputError(f"The '{name}' parameter of {where} must be a positive "
                                         f"density in kg/m^3. Got {val!r} instead.")
            if v < 100:
                raise CrystkinInputError(f"{where}: {name} = {v:g} looks like g/cm^3; give "
                                         "densities in kg/m^3 (1 g/cm^3 = 1000 kg/m^3)")
            refs[name] = f"{name} = {v:.6g} kg/m^3 (given)"
            out.append(v)
    if out[0] is not None and out[1] is not None and not out[0] > out[1]:
        raise CrystkinInputError(f"{where}: the crystal density must exceed the amorphous "
                                 f"density (got rho_c = {out[0]:g}, rho_a = {out[1]:g} kg/m^3)")
    return out[0], out[1], refs


def crystallinity_from_enthalpy(enthalpy, *, enthalpy_sd: float = 0.0, polymer=None,
                                delta_h100=None, filler_fraction: float = 0.0, rho_c=None,
                                rho_a=None, n_draws: int = 4000, seed: int = 0,
                                sample: str = "") -> CrystallinityResult:
    """Crystalline mass (and volume) fraction from a DSC enthalpy.

    Parameters
    ----------
    enthalpy : float, J/kg
        Measured crystallization or fusion enthalpy per kg of sample (positive).
    enthalpy_sd : float, J/kg
    polymer : str, optional
        For the tabulated dH_100 (and rho_c, rho_a when available).
    delta_h100 : float, J/kg, optional
        100 %-crystalline enthalpy; wins over the table.
    filler_fraction : float
        Mass fraction of non-crystallizing components.
    rho_c, rho_a : float, kg/m^3, optional
        For the volume fraction.

    Returns
    -------
    CrystallinityResult

    Notes
    -----
    x_c = dH / ((1 - w_f) dH_100) (see :func:`kinetics.prep.crystallinity.absolute_crystallinity`,
    whose table and sources are used); V_c = W_c/[W_c + (rho_c/rho_a)(1 - W_c)].
    """
    from ..prep.crystallinity import absolute_crystallinity

    where = "crystallinity_from_enthalpy"
    rng = np.random.default_rng(seed)
    ref = absolute_crystallinity(float(enthalpy), polymer=polymer, delta_h100=delta_h100,
                                 filler_fraction=filler_fraction)
    dh = _draws(enthalpy, enthalpy_sd, rng, n_draws, "enthalpy", where)
    w = dh / ((1.0 - ref.filler_fraction) * ref.delta_h100)
    refs = {"delta_h100": f"{ref.delta_h100 / 1e3:g} J/g ({ref.reference}; {ref.status})"}
    rc, ra, drefs = _optional_densities(rho_c, rho_a, polymer, where)
    refs.update(drefs)
    flags = []
    if np.median(w) > 1:
        flags.append("crystallinity above 100 %: check dH_100, the mass and the filler fraction")
    v = mass_to_volume_fraction(w, rc, ra) if rc is not None and ra is not None else None
    return CrystallinityResult("DSC enthalpy", w, v, refs,
                               {"enthalpy_J_per_g": float(enthalpy) / 1e3,
                                "filler_fraction": float(filler_fraction)}, tuple(flags), sample)


def _optional_densities(rho_c, rho_a, polymer, where):
    """Densities for a volume fraction: given, else tabulated, else none (no error)."""
    if rho_c is None and rho_a is None and polymer is None:
        return None, None, {}
    if rho_c is not None and rho_a is not None:
        return _densities(rho_c, rho_a, None, where)
    try:
        return _densities(rho_c, rho_a, polymer, where)
    except CrystkinInputError:
        if rho_c is not None or rho_a is not None:
            raise
        return None, None, {}


def _density_refs_or_error(rho_c, rho_a, polymer, where):
    rc, ra, refs = _densities(rho_c, rho_a, polymer, where)
    if rc is None or ra is None:
        raise CrystkinInputError(f"{where} needs rho_c and rho_a (kg/m^3), or a polymer with "
                                 "tabulated densities")
    return rc, ra, refs


def crystallinity_from_density(rho, *, rho_sd: float = 0.0, rho_c=None, rho_a=None,
                               polymer=None, n_draws: int = 4000, seed: int = 0,
                               sample: str = "") -> CrystallinityResult:
    """Crystalline mass and volume fractions from the sample density (two-phase model).

    Parameters
    ----------
    rho : float, kg/m^3
        Sample density (for example from a density-gradient column).
    rho_sd : float, kg/m^3
    rho_c, rho_a : float, kg/m^3, optional
        Crystal and amorphous densities; default from :mod:`kinetics.constants`.
    polymer : str, optional

    Returns
    -------
    CrystallinityResult

    Notes
    -----
    X_c = rho_c (rho - rho_a) / (rho (rho_c - rho_a)) (mass fraction),
    phi_c = (rho - rho_a)/(rho_c - rho_a) (volume fraction).
    """
    where = "crystallinity_from_density"
    rc, ra, refs = _density_refs_or_error(rho_c, rho_a, polymer, where)
    if float(rho) < 100:
        raise CrystkinInputError(f"{where}: rho = {rho:g} looks like g/cm^3; give the density "
                                 "in kg/m^3 (1 g/cm^3 = 1000 kg/m^3)")
    rng = np.random.default_rng(seed)
    r = _draws(rho, rho_sd, rng, n_draws, "rho", where)
    w = density_crystallinity(r, rc, ra)
    v = (r - ra) / (rc - ra)
    flags = []
    if not ra <= float(rho) <= rc:
        flags.append(f"sample density {float(rho):g} kg/m^3 lies outside [rho_a, rho_c] = "
                     f"[{ra:g}, {rc:g}]; the two-phase model does not apply or the reference "
                     "densities do not fit this sample")
    return CrystallinityResult("density", w, v, refs,
                               {"rho_kg_per_m3": float(rho), "rho_c_kg_per_m3": rc,
                                "rho_a_kg_per_m3": ra}, tuple(flags), sample)


def crystallinity_from_waxd(area_crystalline, area_amorphous, *, area_crystalline_sd=0.0,
                            area_amorphous_sd=0.0, rho_c=None, rho_a=None, polymer=None,
                            n_draws: int = 4000, seed: int = 0,
                            sample: str = "") -> CrystallinityResult:
    """Crystallinity from WAXD peak areas, X_c = A_c / (A_c + A_a).

    Parameters
    ----------
    area_crystalline, area_amorphous : float
        Integrated intensities of the crystalline reflections and of the amorphous halo,
        in the same (arbitrary) unit, after background subtraction.
    area_crystalline_sd, area_amorphous_sd : float
    rho_c, rho_a, polymer
        Optional, for the volume fraction.

    Notes
    -----
    The area ratio estimates the crystalline mass fraction when the scattering power per
    unit mass of both phases is the same (the usual assumption). Conversion to a volume
    fraction: V_c = W_c/[W_c + (rho_c/rho_a)(1 - W_c)].
    """
    where = "crystallinity_from_waxd"
    rng = np.random.default_rng(seed)
    ac = _draws(area_crystalline, area_crystalline_sd, rng, n_draws, "area_crystalline", where)
    aa = _draws(area_amorphous, area_amorphous_sd, rng, n_draws, "area_amorphous", where,
                positive=False)
    if float(area_amorphous) < 0:
        raise CrystkinInputError(f"{where}: the amorphous area must not be negative")
    w = waxd_crystallinity(ac, aa)
    rc, ra, refs = _optional_densities(rho_c, rho_a, polymer, where)
    v = mass_to_volume_fraction(w, rc, ra) if rc is not None else None
    return CrystallinityResult("WAXD", w, v, refs,
                               {"area_crystalline": float(area_crystalline),
                                "area_amorphous": float(area_amorphous)}, (), sample)


def unit_cell_density(cell: UnitCell | str) -> float:
    """Crystal density of a unit cell, kg/m^3 (a :class:`~kinetics.constants.UnitCell` or a
    polymer with a tabulated cell).

    Notes
    -----
    rho_c = z M / (N_A V), with the triclinic cell volume
    V = a b c (1 - cos^2 alpha - cos^2 beta - cos^2 gamma + 2 cos alpha cos beta cos gamma)^(1/2).
    """
    c = unit_cell(cell) if isinstance(cell, str) else cell
    return float(crystal_density(c.a, c.b, c.c, z=c.z, molar_mass=c.molar_mass, alpha=c.alpha,
                                 beta=c.beta, gamma=c.gamma))

