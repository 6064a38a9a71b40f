"""Physics: atmosphere (standard and profiles), rays (ray_kernels: the scheme; rays: the
tracer), carpet geometry, aircraft, F-function, ageing and shocks, ground signature,
Carlson's cross-check, and the table builder's fused fast path."""
