//! The hot loop allocates nothing: a thread-local counting allocator sees no
//! heap allocation between progress reports of a serial run.

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

use crate::common::Gaussian;
use dyad_sampler::{
    run, weighted, DifferentialEvolution, MoveMixture, Progress, RunConfig, RunControl, SampleSink,
    SamplerError, Start, Stretch, Walk,
};

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

/// Allocation counts seen by the progress callback every 100 steps.
fn allocation_trace(parallel: bool) -> Vec<u64> {
    let target = Gaussian::rotated(vec![0.0; 3], &[1.0, 2.0, 3.0], 1);
    let mut config = RunConfig::new(12, 9, 5000);
    config.parallel = parallel;
    config.convergence = None;
    config.history_capacity = 64;
    config.thin = 7;
    config.moves = MoveMixture::new(vec![
        weighted(Stretch::default(), 1.0),
        weighted(DifferentialEvolution::default(), 1.0),
        weighted(Walk::default(), 1.0),
    ])
    .unwrap();
    let start = Start::Ball {
        centre: vec![0.0; 3],
        scale: vec![1.0; 3],
    };
    let mut trace = Vec::with_capacity(100);
    let mut record = |_p: &Progress| trace.push(ALLOCATIONS.with(|c| c.get()));
    let control = RunControl {
        progress: Some(&mut record),
        cancel: None,
        watch: None,
    };
    run(&target, &config, &start, &mut Discard, control).unwrap();
    trace
}

#[test]
fn serial_hot_loop_allocates_nothing() {
    // Between progress reports the loop steps, records samples, updates the
    // tau history (halving it several times) and must not touch the heap.
    let trace = allocation_trace(false);
    assert_eq!(trace.len(), 50);
    assert!(
        trace.windows(2).all(|w| w[0] == w[1]),
        "allocation counts at successive reports: {trace:?}"
    );
}
