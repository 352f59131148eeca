"""Physics: air, geometry and the predictions made from them.

Modules
-------
air
    :func:`~characterize.physics.air.air_state`: speed of sound, density,
    viscosity, thermal conductivity, heat capacity, ratio of specific heats
    and Prandtl number of humid air (Cramer 1993, Davis 1992, U.S. Standard
    Atmosphere 1976).
geometry
    :class:`~characterize.physics.geometry.ResonatorObject` in SI units (the
    object file, TOML, is read into one by :func:`characterize.objectfile.load_object`).
lumped
    End corrections of the neck, the resonance formula, acoustic mass and
    compliance, the object as a 1-D bore.
helmholtz
    :func:`~characterize.physics.helmholtz.predict` (lumped, corrected lumped
    and distributed f0, next modes, predicted Q with each contribution) and its
    inversion from a measured f0 (:func:`~characterize.physics.derive.derive_from_f0`,
    also re-exported by helmholtz).
radiation
    End corrections (round, slot, step), radiation resistance and the
    outside-microphone correction.
losses
    Boundary layers, resistances, the Q budget, Rayleigh's one-third corrections.
distributed
    The 1-D lossy bore model and its complex roots.
nonlinear
    :func:`~characterize.physics.nonlinear.drive_state`: neck motion from the cavity level.
water
    Water density (Tanaka et al. 2001) for volumes measured by filling.

This package imports only :mod:`characterize.units`, :mod:`characterize.errors`
and numpy (the to-scale sketch of an object is drawn in
:mod:`characterize.report.sketch`).
"""
