//! Reproducible random streams: one study seed (`--rng-seed`) split into independent
//! streams (per slice, per frame, …) so parallel work draws the same numbers in any order.

use rand::rngs::Xoshiro256PlusPlus;
use rand::SeedableRng;

/// Mixes the study seed with a stream number (one SplitMix64 step, Steele et al. 2014).
pub fn stream_seed(rng_seed: u64, stream: u64) -> u64 {
    let mut z = rng_seed ^ stream.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The generator of one stream: Xoshiro256++ (a fixed, documented algorithm, so the
/// numbers do not change with the `rand` crate's choice of default generator).
pub fn stream(rng_seed: u64, stream: u64) -> Xoshiro256PlusPlus {
    Xoshiro256PlusPlus::seed_from_u64(stream_seed(rng_seed, stream))
}
