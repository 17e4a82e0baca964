//! Integration tests of the ensemble sampler, compiled into one test binary.

mod common;

mod bounded;
mod curved;
mod gaussian;
mod kill_resume;
mod moves;
mod reproducibility;
mod startup;
mod storage;
mod tempering;
