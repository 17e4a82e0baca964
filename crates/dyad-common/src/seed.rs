//! Seed mixing: SplitMix64 (Steele, Lea & Flood 2014, "Fast splittable
//! pseudorandom number generators", OOPSLA), used to turn a run's seed and
//! a stream's identity (walker, candidate start, simulated system) into
//! unrelated seeds, so that results depend on the seed only and never on
//! the order or the thread in which the streams run.

/// The golden-ratio increment of SplitMix64, 2^64 / phi (odd).
pub const GOLDEN_GAMMA: u64 = 0x9E37_79B9_7F4A_7C15;

/// The SplitMix64 output function (Stafford's "mix13" variant of the
/// MurmurHash3 finaliser): a bijection of `u64` that scatters nearby
/// inputs.
pub fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// One SplitMix64 step from state `z`: the output after adding the
/// increment.
pub fn splitmix64(z: u64) -> u64 {
    mix64(z.wrapping_add(GOLDEN_GAMMA))
}

/// A seed for item `index` of a run seeded with `seed`.
pub fn mix_seed(seed: u64, index: u64) -> u64 {
    splitmix64(seed ^ index.wrapping_mul(GOLDEN_GAMMA))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix64_matches_the_reference_sequence() {
        // The first three outputs of SplitMix64 seeded with 0 (the
        // reference implementation of Vigna's splitmix64.c; from memory).
        assert_eq!(splitmix64(0), 0xE220_A839_7B1D_CDAF);
        assert_eq!(splitmix64(GOLDEN_GAMMA), 0x6E78_9E6A_A1B9_65F4);
        assert_eq!(
            splitmix64(GOLDEN_GAMMA.wrapping_mul(2)),
            0x06C4_5D18_8009_454F
        );
    }

    #[test]
    fn nearby_items_get_unrelated_seeds() {
        let mut seen = std::collections::BTreeSet::new();
        for seed in 0..10 {
            for index in 0..100 {
                assert!(seen.insert(mix_seed(seed, index)));
            }
        }
    }
}
