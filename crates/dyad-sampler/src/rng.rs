//! Per-walker random streams.
//!
//! Every walker owns a Xoshiro256++ generator seeded from a value mixed from
//! (run seed, stream identity), so a walker's random numbers never depend on
//! which thread updates it or in which order: results depend on the seed
//! only, never on the number of threads.

use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;

/// The generator type used by every stream of a run.
pub type StreamRng = Xoshiro256PlusPlus;

// SplitMix64 (Steele, Lea & Flood 2014) decorrelates nearby seeds.
use dyad_common::seed::splitmix64;

/// Kinds of stream, so that walker, start-up and swap streams never coincide.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Stream {
    /// Moves of walker `walker` in temperature `rung`.
    Walker { rung: usize, walker: usize },
    /// Initial positions of temperature `rung`.
    Start { rung: usize },
    /// Swaps between temperatures.
    Swaps,
    /// The random split of temperature `rung` into halves at step `step`.
    Split { rung: usize, step: u64 },
}

impl Stream {
    fn id(self) -> u64 {
        match self {
            Stream::Walker { rung, walker } => ((rung as u64) << 32) | (walker as u64),
            Stream::Start { rung } => (1u64 << 62) | rung as u64,
            Stream::Swaps => 1u64 << 63,
            // Bit 61 apart from the others (walker ids stay below 2^61).
            Stream::Split { rung, step } => {
                (1u64 << 61) | ((rung as u64) << 40) | (step & ((1u64 << 40) - 1))
            }
        }
    }
}

/// Generator for one stream of a run with `seed`.
pub(crate) fn stream_rng(seed: u64, stream: Stream) -> StreamRng {
    let mixed = splitmix64(seed ^ splitmix64(stream.id()));
    StreamRng::seed_from_u64(mixed)
}
