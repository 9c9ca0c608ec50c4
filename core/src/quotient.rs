//! Quotients of counts rounded to f32 (void fractions, mean chords), with one f32 division
//! wherever that gives the value of the f64 quotient rounded to f32.

/// Integers below this are exact in f32.
const EXACT: u64 = 1 << 24;

/// `num / den`: the f64 quotient rounded to f32. When both are below 2^24 they are exact
/// in f32, and one f32 division gives the same value, bit for bit: rounding the f64
/// quotient of two f32 values to f32 is innocuous, as 53 >= 2 * 24 + 2 bits (Figueroa
/// 1995, "When is double rounding innocuous?", ACM SIGNUM Newsletter 30(3)). A Cortex-M4F
/// then divides in one instruction instead of a soft-float f64 division.
#[inline]
pub fn count_quotient(num: u64, den: u64) -> f32 {
    if num < EXACT && den < EXACT {
        // Through u32: the same values, converted in one instruction (no 64-bit call).
        (num as u32) as f32 / (den as u32) as f32
    } else {
        (num as f64 / den as f64) as f32
    }
}

/// [`count_quotient`] of a signed sum (a sum of sample values) by a count.
#[inline]
pub fn sum_quotient(num: i64, den: u64) -> f32 {
    if num.unsigned_abs() < EXACT && den < EXACT {
        (num as i32) as f32 / (den as u32) as f32
    } else {
        (num as f64 / den as f64) as f32
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The f32 division equals the f64 quotient rounded, bit for bit, on random counts
    /// (small, near 2^24, the numerator below the denominator as in a void fraction) and
    /// on quotients near ties.
    #[test]
    fn f32_division_equals_the_rounded_f64_quotient() {
        let mut next = crate::test_rng::xorshift(0x2545_F491_4F6C_DD1D);
        for case in 0..1_000_000u64 {
            let bits = 1 + case % 24;
            let den = 1 + next() % ((1 << bits) - 1).max(1);
            let num = match case % 3 {
                0 => next() % (den + 1),
                1 => next() % EXACT,
                _ => den.saturating_sub(1 + next() % 4),
            };
            let want = (num as f64 / den as f64) as f32;
            assert_eq!(
                count_quotient(num, den).to_bits(),
                want.to_bits(),
                "{num} / {den}"
            );
            let signed = -(num as i64);
            let want = (signed as f64 / den as f64) as f32;
            assert_eq!(
                sum_quotient(signed, den).to_bits(),
                want.to_bits(),
                "{signed} / {den}"
            );
        }
        // Beyond 2^24 the f64 path is taken: 2^24 + 1 is not an f32.
        let (num, den) = (EXACT + 1, EXACT + 3);
        assert_eq!(
            count_quotient(num, den).to_bits(),
            ((num as f64 / den as f64) as f32).to_bits()
        );
    }
}
