"""Layer 2, dynamics: trajectories and what they tell.

One core serves both trackers: :mod:`.integrators` (the registry of symplectic splitting
schemes, Verlet and Yoshida's 4th order), :mod:`.checks` (particle arrays, the step count
and its one limit, progress) and :mod:`.results` (the :class:`TrackingResult`). The field
kernels of the rigid trap live in :mod:`.kernels` and :mod:`.fieldmap`; the summed coil
tables of the time-dependent row in :mod:`.coilmap`. :mod:`.tracking` integrates in the
decelerating frame of a rigid trap, :mod:`.device` in the lab frame through the coil row,
:mod:`.compare` sets the row against its rigid, phase-averaged twin, and :mod:`.capture`
gives the three captured-fraction estimates side by side.
"""
