"""Motion planning: path checks, time scaling and cycle time, RRT-Connect, base placement."""
