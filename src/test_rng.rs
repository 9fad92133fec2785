//! A small deterministic generator for the library's randomized unit tests
//! (xorshift64*, Vigna 2016, from memory), so that every run tries the same
//! cases.

/// The generator's state; any seed but zero.
pub(crate) struct Rng(pub(crate) u64);

impl Rng {
    /// The next 64 bits.
    pub(crate) fn step(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }

    /// A whole number in 0..n (n > 0), from the step's high 53 bits.
    pub(crate) fn below(&mut self, n: u64) -> u64 {
        (self.step() >> 11) % n
    }

    /// A number in [0, 1).
    pub(crate) fn unit(&mut self) -> f64 {
        (self.step() >> 11) as f64 / (1u64 << 53) as f64
    }
}
