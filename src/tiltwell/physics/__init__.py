"""Layer 1, physics: constants, species and their Zeeman energies, coil and quadrupole
fields, the supersonic source and its beam, hardware estimates. Pure functions and small
frozen dataclasses; imports only :mod:`tiltwell._base`."""
