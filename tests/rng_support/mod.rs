//! The integration tests' random draws: two small deterministic generators,
//! seeded by each test, so that every run tries the same cases.
//!
//! - [`Rng`]: SplitMix64 (Steele, Lea & Flood 2014, from memory), with
//!   uniform numbers in (0, 1) and normal ones by Box–Muller (Box & Muller
//!   1958): the Monte Carlo checks of the ladder and the transient fits.
//! - [`XorShift`]: xorshift64* (Vigna 2016, from memory): the random
//!   programmes and inputs of the budget and fuzz tests.
//!
//! Each test file includes it with `mod rng_support;`; not every file uses
//! every item. (The library's own unit tests have `src/test_rng.rs`.)
#![allow(dead_code)]

/// SplitMix64's state.
pub struct Rng(pub u64);

impl Rng {
    /// The next 64 bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// A number in (0, 1): the high 53 bits, centred in their cell.
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// A standard normal number (Box–Muller, the cosine branch).
    pub fn gauss(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }

    /// A number in (lo, hi).
    pub fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }
}

/// xorshift64*'s state; any seed but zero.
pub struct XorShift(pub u64);

impl XorShift {
    /// The next 64 bits.
    pub fn step(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }

    /// A number in [0, 1), from the step's high 53 bits.
    pub fn unit(&mut self) -> f64 {
        (self.step() >> 11) as f64 / (1u64 << 53) as f64
    }
}
