"""posebridge: robot work-cell layout and troubleshooting, in Cartesian and joint space."""

from posebridge.kernel_cache import use_kernel_cache

# before any module defines a kernel: numba's disk cache keyed by the kernel sources
use_kernel_cache()
