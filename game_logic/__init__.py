"""Pure model of the Ebbtide harvest game: no Flask, no database, no clock.

Randomness always arrives as a ``numpy.random.Generator`` argument, so that a
session is fully determined by its study design, its seed and its decision log.
"""
