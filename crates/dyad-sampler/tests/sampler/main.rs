//! Integration tests of the ensemble sampler, compiled into one test binary.

// Index loops mirror the matrix formulas they implement.
#![allow(clippy::needless_range_loop)]

mod common;

mod alloc;
#[global_allocator]
static COUNTING: alloc::CountingAllocator = alloc::CountingAllocator;

mod bounded;
mod burn_in;
mod checkpoint_format;
mod curved;
mod diagnosis;
mod gaussian;
mod kill_resume;
mod moves;
mod reproducibility;
mod startup;
mod storage;
mod tempering;
