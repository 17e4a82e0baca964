//! dyad-report (to be written).
