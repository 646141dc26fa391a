"""Layer 1, base: one validation helper and the project's error type, result display, and
atomic file writing. Imported by every other layer; imports none of them."""
