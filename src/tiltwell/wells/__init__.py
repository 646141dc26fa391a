"""Layer 2, wells: the potential of a species in a field (:mod:`.traps`), the 1-D separatrix,
the energetic 6-D acceptance, the acceptances of a trap against deceleration, and the overlap
of a beam with them. No plotting, no widgets, no files."""
