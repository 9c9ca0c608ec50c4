//! Reproducible pseudo-random inputs for the unit tests: Marsaglia's xorshift64
//! (Marsaglia 2003, "Xorshift RNGs", Journal of Statistical Software 8(14)).

/// The xorshift64 sequence from `seed` (not zero).
pub(crate) fn xorshift(mut x: u64) -> impl FnMut() -> u64 {
    move || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x
    }
}
