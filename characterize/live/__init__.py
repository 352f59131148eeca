"""Measuring live: play a sweep, record both microphones, fit, and the tuning loop.

Modules (each imports sounddevice, when at all, inside the functions that play):

- :mod:`.devices`: the audio devices PortAudio sees (python-sounddevice),
  picking one by number or name, checking channels and rates.
- :mod:`.stream`: one full-duplex stream that plays and records on the same
  clock (:func:`~.stream.play_record`), with the stream's per-block status and
  Ctrl-C that stops the sound at once and keeps what was recorded.
- :mod:`.takes`: judging a recorded take by itself: the delay, the device's
  dead start, silence, gaps and timing slips, clipping.
- :mod:`.bench`: a bench is a device behind one interface: the real one
  (:class:`~.bench.DeviceBench`) or the simulated one
  (:class:`~.simbench.SimulatedBench`, on :mod:`characterize.simulate`).
- :mod:`.measure`: the ``measure`` job: level probe, takes with retries, raw
  takes saved first, fits, repeat statistics.
- :mod:`.session`: the ``tune`` loop: measure, advise, log the change made.
"""
