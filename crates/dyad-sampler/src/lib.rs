//! dyad-sampler (to be written).
