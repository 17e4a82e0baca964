//! The hot loop allocates nothing: heap allocations of a serial run do not
//! grow with the number of steps (counted by a thread-local counting allocator).

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

use crate::common::Gaussian;
use dyad_sampler::{run, Move, MoveMixture, RunConfig, RunControl, SampleSink, SamplerError, Start};

pub struct CountingAllocator;

thread_local! {
    static ALLOCATIONS: Cell<u64> = const { Cell::new(0) };
}

unsafe impl GlobalAlloc for CountingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCATIONS.with(|c| c.set(c.get() + 1));
        System.alloc(layout)
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout)
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        ALLOCATIONS.with(|c| c.set(c.get() + 1));
        System.realloc(ptr, layout, new_size)
    }
}

/// A sink that keeps nothing, so only the sampler's own allocations count.
struct Discard;
impl SampleSink for Discard {
    fn append(&mut self, _step: u64, _values: &[f64]) -> Result<(), SamplerError> {
        Ok(())
    }
    fn sync(&mut self) -> Result<u64, SamplerError> {
        Ok(0)
    }
    fn truncate(&mut self, _position: u64) -> Result<(), SamplerError> {
        Ok(())
    }
}

fn allocations_for(steps: u64) -> u64 {
    let target = Gaussian::rotated(vec![0.0; 3], &[1.0, 2.0, 3.0], 1);
    let mut config = RunConfig::new(12, 9, steps);
    config.parallel = false;
    config.convergence = None;
    config.history_capacity = 64;
    config.moves = MoveMixture::new(vec![
        (Move::stretch(), 1.0),
        (Move::differential_evolution(), 1.0),
        (Move::walk(), 1.0),
    ])
    .unwrap();
    let start = Start::Ball {
        centre: vec![0.0; 3],
        scale: vec![1.0; 3],
    };
    let before = ALLOCATIONS.with(|c| c.get());
    run(&target, &config, &start, &mut Discard, RunControl::default()).unwrap();
    ALLOCATIONS.with(|c| c.get()) - before
}

#[test]
fn serial_run_allocations_do_not_grow_with_steps() {
    let short = allocations_for(500);
    let long = allocations_for(5000);
    assert_eq!(short, long, "allocations: {short} for 500 steps, {long} for 5000");
}
