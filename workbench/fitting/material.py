"""A fitted Steinmetz set (and separation) as a user material."""
from __future__ import annotations

import datetime as _dt
from pathlib import Path

from workbench.checks import positive_number
from workbench.fitting.separation import SeparationFit
from workbench.fitting.steinmetz import SteinmetzFit

__all__ = ["fitted_material", "save_fitted_material"]

_MATERIAL_FIELDS = ("density", "resistivity", "b_sat", "rel_permeability", "thickness")


def fitted_material(name: str, fit, *, base=None, family: str | None = None, description: str | None = None,
                    separation: SeparationFit | None = None, date: str | None = None, **properties):
    """Build a :class:`workbench.materials.Material` from a fit.

    Parameters
    ----------
    name : str
        New material name.
    fit : SteinmetzFit
        Steinmetz set (its fitted range becomes the validity range).
    base : Material, optional
        Material lending family, density, resistivity, b_sat, rel_permeability, thickness
        (with their sources) unless given in ``properties``.
    family, description : str, optional
        Override the base's family; description defaults to one naming the table.
    separation : SeparationFit, optional
        Separation coefficients fitted to the same table.
    date : str, optional
        ISO date for the provenance (default today).
    **properties
        ``density`` [kg/m^3], ``resistivity`` [ohm m], ``b_sat`` [T], ``rel_permeability``
        [-], ``thickness`` [m]; required where there is no base.

    Returns
    -------
    Material
        Every fitted value with the source ``"fitted to FILE on DATE"``.
    """
    from workbench.materials import Material

    if not isinstance(fit, SteinmetzFit):
        raise ValueError(f"fit must be a SteinmetzFit, got {type(fit).__name__}")
    unknown = sorted(set(properties) - set(_MATERIAL_FIELDS))
    if unknown:
        raise ValueError(f"unknown material property {unknown[0]!r}; use {', '.join(_MATERIAL_FIELDS)}")
    date = date or _dt.date.today().isoformat()
    prov = f"fitted to {Path(fit.source).name} on {date}"
    values, sources = {}, {}
    for key in _MATERIAL_FIELDS:
        if properties.get(key) is not None:
            v = positive_number(properties[key], key)
            values[key], sources[key] = v, "given by the user when saving the fit"
        elif base is not None:
            values[key], sources[key] = getattr(base, key), f"from {base.name}: {base.sources.get(key, 'no source')}"
        else:
            raise ValueError(f"{key} is needed for the material: give it or a base material to take it from")
    fam = family or (base.family if base is not None else None)
    if fam is None:
        raise ValueError("family is needed for the material: give it or a base material")
    for key in ("k", "alpha", "beta", "freq_range", "b_range"):
        sources[f"steinmetz.{key}"] = prov + (f" ({fit.n_points} points, rms error {fit.rms_rel_error:.1%})" if key == "k" else "")
    if fit.temperature is not None:
        for key in ("ct0", "ct1", "ct2"):
            sources[f"steinmetz.temperature.{key}"] = f"{prov} (factor 1 at {fit.reference_temperature:g} degC)"
    if separation is not None:
        for key in ("k_hyst", "beta_hyst", "k_excess"):
            sources[f"separation.{key}"] = prov
    desc = description or (f"Fitted to the loss table {Path(fit.source).name} on {date}"
                           + (f"; other properties from {base.name}" if base is not None else "") + ".")
    return Material(name=name, family=fam, description=desc, steinmetz=fit.params,
                    separation=None if separation is None else separation.params,
                    sources=sources, origin="fitted", **values)


def save_fitted_material(name: str, fit, *, path=None, overwrite: bool = False, **kwargs) -> Path:
    """Build the material of :func:`fitted_material` and store it in the user library.

    Parameters
    ----------
    name : str
        New material name (not a bundled one).
    fit : SteinmetzFit
        The fitted set.
    path : str or path, optional
        User library file (default the user library of :mod:`workbench.materials`).
    overwrite : bool
        Replace an existing user material of that name.
    **kwargs
        Passed to :func:`fitted_material`.

    Returns
    -------
    Path
        The library file written (atomically, by :func:`workbench.materials.save_user_material`).
    """
    from workbench.materials import save_user_material

    material = fitted_material(name, fit, **kwargs)
    return save_user_material(material, path=path, overwrite=overwrite)
