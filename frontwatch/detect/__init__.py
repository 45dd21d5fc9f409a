"""Per-station online detection: a cheap gate, change-point scoring over a window, classification."""
