//! SplitMix64 (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number generators"): a
//! seeded generator written out here so a case number means the same mutation on every machine
//! and with every version of every dependency.

/// A seeded pseudorandom generator.
pub struct Rng(u64);

impl Rng {
    /// A generator for one case: the run's seed mixed with the case number.
    pub fn for_case(seed: u64, case: u64) -> Rng {
        let mut r = Rng(seed ^ case.wrapping_mul(0xA076_1D64_78BD_642F));
        r.next();
        r
    }

    /// The next 64 random bits.
    pub fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// A number in 0..n (n > 0).
    pub fn below(&mut self, n: u64) -> u64 {
        // Multiply-shift (Lemire 2019) keeps the bias below 2^-32 for the small n used here.
        ((u128::from(self.next()) * u128::from(n.max(1))) >> 64) as u64
    }
}

#[cfg(test)]
mod tests {
    // Check: SplitMix64 with seed 0 gives 0xE220A8397B1DCDAF first (reference C code of
    // Vigna's xoshiro page, prng.di.unimi.it/splitmix64.c); from memory.
    #[test]
    fn splitmix_reference_value() {
        let mut r = super::Rng(0);
        assert_eq!(r.next(), 0xE220_A839_7B1D_CDAF);
    }
}
