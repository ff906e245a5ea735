//! Longevity hedges: indemnity swap and q-forward.
