"""Device parameters of a tech file fitted to a foundry's SPICE models.

Modules: :mod:`~analyze.characterize.fits` (the body-effect and depletion
fits, the constant-current threshold), :mod:`~analyze.characterize.measure`
(the ngspice decks), :mod:`~analyze.characterize.process` (one corner:
measure, fit, cache; the inverter threshold),
:mod:`~analyze.characterize.techout` (the fitted tech file's text).

May import: :mod:`extract`, :mod:`analyze.simulator`, :mod:`analyze.stages`.
"""
