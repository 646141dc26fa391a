"""Layer 2, dynamics: field maps, trajectories in the decelerating frame (rigid trap) and in
the lab frame (the coil row), the coil row against its rigid twin, and the three
captured-fraction estimates."""
