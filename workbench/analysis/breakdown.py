"""Loss breakdown of one waveform on one material: the engine's result under its older name.

:func:`breakdown` is :func:`workbench.engine.core_loss` with the waveform and
material first; :class:`LossBreakdown` is :class:`workbench.engine.LossResult`.
"""
from __future__ import annotations

from workbench.engine import LossResult, core_loss

__all__ = ["LossBreakdown", "breakdown"]

LossBreakdown = LossResult


def breakdown(
    waveform,
    material,
    *,
    temperature: float | None = None,
    thickness: float | None = None,
    resistivity: float | None = None,
    skin_effect: bool = True,
    minor_loops: bool = True,
    threshold: float | None = None,
    h_dc: float | None = None,
) -> LossResult:
    """Total loss and its hysteresis / classical eddy / excess parts for one waveform.

    Parameters
    ----------
    waveform : FluxWaveform or ShapeSpec
        One period of flux.
    material : workbench.materials.Material or str
        Material data or its library name.
    temperature : float, optional
        Core temperature [degC]; None takes the material's reference temperature (stated in the warnings).
    thickness : float, optional
        Lamination thickness [m]; default the material's (an override replaces the classical part).
    resistivity : float, optional
        Resistivity [ohm m]; default the material's.
    skin_effect : bool, optional
        Include the skin effect in the classical part. Default True.
    minor_loops : bool, optional
        Count minor loops separately (iGSE procedure). Default True.
    threshold : float, optional
        Smallest reversal counted as a loop [T]; default derived from the data.
    h_dc : float, optional
        DC bias field strength [A/m].

    Returns
    -------
    LossBreakdown

    Notes
    -----
    See :func:`workbench.engine.core_loss`: the iGSE/i2GSE total beside the
    separation ``P = P_hyst + P_classical + P_excess``.

    References
    ----------
    .. [1] K. Venkatachalam et al., IEEE COMPEL 2002.
    .. [2] J. Muehlethaler et al., IEEE Trans. Power Electron. 27(2), 2012.
    .. [3] G. Bertotti, IEEE Trans. Magn. 24(1), 1988.
    """
    return core_loss(waveform, material, temperature=temperature, thickness=thickness, resistivity=resistivity,
                     skin_effect=skin_effect, minor_loops=minor_loops, threshold=threshold, h_dc=h_dc)
