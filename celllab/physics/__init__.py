"""Pure device and circuit physics for decap characterization (numpy/scipy only, SI units)."""
