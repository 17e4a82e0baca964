//! Placeholder; written by the statistics engineer.
