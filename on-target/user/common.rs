//! Pieces the user probes' runs share with their host twins: seeded noise
//! that is exact in f32 and the per-step hash of a filter's bits. Plain
//! `core` code, included by path on both sides.

/// A linear congruential generator (Numerical Recipes' constants), for
/// repeatable inputs on host and target alike.
pub struct Lcg(pub u32);

impl Lcg {
    /// The next raw 32-bit value.
    pub fn next_u32(&mut self) -> u32 {
        self.0 = self.0.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        self.0
    }

    /// A value in [-1, 1): the top 24 bits as a signed integer times 2^-23,
    /// exact in f32 on every IEEE-754 machine.
    pub fn signed_unit(&mut self) -> f32 {
        let top = (self.next_u32() >> 8) as i32 - (1 << 23);
        top as f32 * (1.0 / 8_388_608.0)
    }
}

/// The FNV-1a offset basis (32 bits), the hash of nothing.
pub const FNV_BASIS: u32 = 0x811c_9dc5;

/// Folds one 32-bit word into an FNV-1a hash, byte by byte, low byte first
/// (Fowler, Noll and Vo's FNV-1a, 32-bit prime 16777619).
pub fn fnv1a(mut hash: u32, word: u32) -> u32 {
    for byte in word.to_le_bytes() {
        hash ^= u32::from(byte);
        hash = hash.wrapping_mul(0x0100_0193);
    }
    hash
}

/// Folds every f32 of a slice into the hash by its bit pattern.
pub fn fold_bits(mut hash: u32, values: &[f32]) -> u32 {
    for v in values {
        hash = fnv1a(hash, v.to_bits());
    }
    hash
}

/// What a run did, and the hash of its bits after every step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Tally {
    /// Updates applied.
    pub applied: u32,
    /// Updates gated out.
    pub gated: u32,
    /// Operations the filter refused.
    pub refused: u32,
    /// FNV-1a over the covariance's and the state's bits after every step.
    pub trace: u32,
}

impl Tally {
    /// A tally of nothing.
    pub const fn new() -> Self {
        Self {
            applied: 0,
            gated: 0,
            refused: 0,
            trace: FNV_BASIS,
        }
    }

    /// Counts an update's result.
    pub fn update<E>(&mut self, r: Result<cairn_core::Outcome<f32>, E>) {
        match r {
            Ok(o) if o.is_applied() => self.applied += 1,
            Ok(_) => self.gated += 1,
            Err(_) => self.refused += 1,
        }
    }

    /// Counts a predict's result.
    pub fn predict<E>(&mut self, r: Result<(), E>) {
        if r.is_err() {
            self.refused += 1;
        }
    }

    /// Folds the step's covariance and state bits into the trace.
    pub fn fold(&mut self, p: &[f32], x: &[f32]) {
        self.trace = fold_bits(fold_bits(self.trace, p), x);
    }
}

impl Default for Tally {
    fn default() -> Self {
        Self::new()
    }
}
