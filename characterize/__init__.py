"""characterize: measure acoustic resonators.

Data flows one way::

    audio -> transfer -> fitting -> checks -> report
                physics (air, geometry) --^

Python entry points (everything the command line does):

- :func:`characterize.pipeline.analyze` -- recording (+ object file) to a
  :class:`characterize.pipeline.Result`.
- :func:`characterize.excitation.make_sweep` -- exponential sine sweep.
- :func:`characterize.physics.helmholtz.predict` -- geometry to f0.
- :mod:`characterize.simulate` -- measurement-chain simulator with known truth.
"""

from ._version import SCHEMA as SCHEMA
from ._version import __version__ as __version__
