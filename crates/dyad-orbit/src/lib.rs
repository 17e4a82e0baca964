//! dyad-orbit (to be written).
