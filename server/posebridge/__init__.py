"""posebridge: robot work-cell layout and troubleshooting, in Cartesian and joint space."""
