"""Physics: air, geometry and the predictions made from them.

Modules
-------
air
    :func:`~characterize.physics.air.air_state`: speed of sound, density,
    viscosity, thermal conductivity, heat capacity, ratio of specific heats
    and Prandtl number of humid air (Cramer 1993, Davis 1992, U.S. Standard
    Atmosphere 1976).
geometry
    :func:`~characterize.physics.geometry.load_object`: the object file (TOML)
    to a :class:`~characterize.physics.geometry.ResonatorObject` in SI units.
helmholtz
    End corrections, the lumped Helmholtz prediction
    (:func:`~characterize.physics.helmholtz.predict`) and its inversion from a
    measured f0 (:func:`~characterize.physics.helmholtz.derive_from_f0`).

This package imports only :mod:`characterize.units`, :mod:`characterize.errors`
and numpy/scipy.
"""
