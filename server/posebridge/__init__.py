"""posebridge: robot work-cell layout and troubleshooting, in Cartesian and joint space."""

from posebridge.kernel_cache import use_kernel_cache
from posebridge.kernel_threads import use_passive_waiting

# before any module defines a kernel: numba's disk cache keyed by the kernel sources
use_kernel_cache()
# before numba starts its threads: idle threads sleep rather than spin
use_passive_waiting()
