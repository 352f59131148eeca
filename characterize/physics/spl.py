"""Sound pressure level and RMS pressure, dB re 20 uPa: the one conversion
every module uses (calibration, drive levels, level studies, plots)."""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["REFERENCE_PRESSURE_PA", "spl_to_pressure_pa", "pressure_to_spl_db"]

#: Reference pressure of SPL, 20 uPa rms (IEC 61672-1 / ISO 80000-8 convention).
REFERENCE_PRESSURE_PA = 20e-6


def spl_to_pressure_pa(spl_db: Any) -> Any:
    r"""RMS pressure from a sound pressure level.

    .. math::

        p_\text{rms} = p_\text{ref}\,10^{L/20},\quad p_\text{ref} = 20\ \mu\text{Pa}

    Parameters
    ----------
    spl_db : float or array
        SPL, dB re 20 uPa.

    Returns
    -------
    float or array
        RMS pressure, Pa (94 dB gives 1.00237 Pa, 114 dB 10.0237 Pa).

    References
    ----------
    IEC 61672-1:2013, *Electroacoustics -- Sound level meters*, definition of
    sound pressure level; ISO 80000-8:2020, *Quantities and units -- Part 8:
    Acoustics* (both from memory); physics sheet section 10 (94 dB = 1.00237 Pa).
    """
    return REFERENCE_PRESSURE_PA * 10.0 ** (np.asarray(spl_db, dtype=float) / 20.0)


def pressure_to_spl_db(p_rms_pa: Any) -> Any:
    """Sound pressure level (dB re 20 uPa) from an RMS pressure (Pa).

    Parameters
    ----------
    p_rms_pa : float or array
        RMS pressure, Pa.

    Returns
    -------
    float or array
        SPL, dB re 20 uPa. The inverse of :func:`spl_to_pressure_pa`.
    """
    return 20.0 * np.log10(np.asarray(p_rms_pa, dtype=float) / REFERENCE_PRESSURE_PA)
