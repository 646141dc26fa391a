"""Layer 2, coils: the deceleration schedule and coil timing, the row of coils and the
currents that move its field zero, and the moving trap as it crosses one pitch."""
