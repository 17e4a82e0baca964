//! dyad-model (to be written).
