//! SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number
//! generators", OOPSLA 2014; constants as in Vigna's reference
//! `splitmix64.c`): a tiny deterministic generator, so that sampled test
//! and benchmark inputs are the same on every machine and run.

/// SplitMix64 state. Not for anything that needs unpredictability.
#[derive(Debug, Clone)]
pub struct SplitMix64(u64);

impl SplitMix64 {
    pub fn new(seed: u64) -> Self {
        Self(seed)
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E3779B97F4A7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58476D1CE4E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D049BB133111EB);
        z ^ (z >> 31)
    }

    /// A value in `0..n` (by remainder: the slight bias is irrelevant for
    /// picking test inputs). `n` must be positive and fit a node id.
    pub fn below(&mut self, n: usize) -> u32 {
        (self.next_u64() % n as u64) as u32
    }
}

/// `count` node ids below `n` from `seed`.
pub fn nodes(n: usize, count: usize, seed: u64) -> Vec<u32> {
    let mut rng = SplitMix64::new(seed);
    (0..count).map(|_| rng.below(n)).collect()
}

/// `count` (source, target) pairs of node ids below `n` from `seed`; each
/// pair draws its source first.
pub fn node_pairs(n: usize, count: usize, seed: u64) -> Vec<(u32, u32)> {
    let mut rng = SplitMix64::new(seed);
    (0..count)
        .map(|_| {
            let s = rng.below(n);
            (s, rng.below(n))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The first outputs for seed 0 as published with Vigna's reference
    /// implementation `splitmix64.c` (state `x = 0`, `next()` three times).
    /// Before relying on them they were recomputed here with an independent
    /// Python implementation of the reference C code (64-bit masking of
    /// each step), which printed the same three values.
    #[test]
    fn seed_zero_matches_the_reference_implementation() {
        let mut r = SplitMix64::new(0);
        assert_eq!(r.next_u64(), 0xe220a8397b1dcdaf);
        assert_eq!(r.next_u64(), 0x6e789e6aa1b965f4);
        assert_eq!(r.next_u64(), 0x06c45d188009454f);
    }

    #[test]
    fn samplers_draw_from_the_same_stream() {
        let mut r = SplitMix64::new(7);
        let pairs = node_pairs(1000, 3, 7);
        for &(s, t) in &pairs {
            assert_eq!((s, t), (r.below(1000), r.below(1000)));
        }
        let mut r = SplitMix64::new(9);
        let ids = nodes(50, 10, 9);
        assert!(ids.iter().all(|&v| v == r.below(50)));
        assert!(ids.iter().all(|&v| v < 50));
    }
}
