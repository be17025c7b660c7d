//! A small seeded pseudo-random generator for the bootstrap, so that results depend
//! only on the seed (no global state, no crate whose stream may change between
//! versions).
//!
//! # Formula
//! SplitMix64 (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number
//! generators", OOPSLA): state += 0x9E3779B97F4A7C15, then two xor-shift-multiply
//! rounds. Bounded integers use the multiply-high map of Lemire (2019, "Fast random
//! integer generation in an interval", ACM TOMACS 29:3); its bias (< n / 2^64) is
//! far below anything a bootstrap over tens of animals can see.

pub(crate) struct SplitMix64 {
    state: u64,
}

impl SplitMix64 {
    pub(crate) fn new(seed: u64) -> Self {
        SplitMix64 { state: seed }
    }

    pub(crate) fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform integer in `0..n` (`n > 0`).
    pub(crate) fn below(&mut self, n: usize) -> usize {
        ((u128::from(self.next_u64()) * n as u128) >> 64) as usize
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn first_outputs_match_reference_stream() {
        // Reference values for seed 1234567 computed by an independent Python
        // transcription of the published algorithm (arbitrary-precision integers
        // reduced mod 2^64); they also match the widely quoted test vector for this
        // seed (recalled from memory).
        let mut r = SplitMix64::new(1234567);
        let first = r.next_u64();
        let second = r.next_u64();
        assert_eq!(first, 6457827717110365317);
        assert_eq!(second, 3203168211198807973);
    }

    #[test]
    fn below_stays_in_range_and_covers_it() {
        let mut r = SplitMix64::new(7);
        let mut seen = [0usize; 5];
        for _ in 0..5000 {
            seen[r.below(5)] += 1;
        }
        assert!(seen.iter().all(|&c| c > 800), "{seen:?}");
    }
}
