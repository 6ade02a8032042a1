"""Physics of a flight: air, gravity, the specimen, forces, drag laws and the 3-D-ready simulator.

Pure functions and small frozen dataclasses, SI units, each formula with its published source.
Never does I/O or fitting.
"""
