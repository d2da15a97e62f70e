//! Sorting many numbers: the order statistics of big lots (Anderson–Darling needs every
//! characteristic of every lot sorted: 6 million values for a lot of 200,000 units × 30).
//!
//! The values are sorted as unsigned integers: each value's bit pattern mapped so that the
//! integers order exactly as [`f64::total_cmp`] orders the values (negative values have every
//! bit flipped, the others only the sign bit). The standard library's unstable sort compares
//! integers in one instruction, which makes it about a third faster here than the same sort
//! with `total_cmp` as the comparison (measured here on 2 × 10⁵ and 10⁶ normal values).

/// The value's bit pattern as an unsigned key in [`f64::total_cmp`] order.
#[inline]
fn key(x: f64) -> u64 {
    let b = x.to_bits();
    if b >> 63 == 1 { !b } else { b | (1 << 63) }
}

/// The value of a key (the inverse of [`key`]).
#[inline]
fn value(k: u64) -> f64 {
    f64::from_bits(if k >> 63 == 1 { k & !(1 << 63) } else { !k })
}

/// The values in [`f64::total_cmp`] order, as a new vector (one allocation, reused from the
/// keys').
pub fn sorted(values: impl Iterator<Item = f64>) -> Vec<f64> {
    let mut keys: Vec<u64> = values.map(key).collect();
    keys.sort_unstable();
    keys.into_iter().map(value).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against the standard library's comparison sort with `total_cmp` (a property: the same
    /// order, bit for bit), on smooth values, far outliers, repeats, zeros of both signs,
    /// subnormal values, infinities and NaN.
    #[test]
    fn orders_as_total_cmp() {
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            ((state >> 11) as f64) / (1u64 << 53) as f64
        };
        for n in [0, 1, 5, 4096, 10_007, 100_000] {
            let smooth: Vec<f64> = (0..n).map(|_| 10.0 + next()).collect();
            let mixed: Vec<f64> = (0..n)
                .map(|i| match i % 13 {
                    0 => 0.0,
                    1 => -0.0,
                    2 => 1.5,
                    3 => 1e300 * next(),
                    4 => -1e-300 * next(),
                    5 => f64::MIN_POSITIVE / 4.0,
                    6 => f64::INFINITY,
                    7 => f64::NEG_INFINITY,
                    8 => f64::NAN,
                    9 => -f64::NAN,
                    _ => next() - 0.5,
                })
                .collect();
            for v in [smooth, mixed] {
                let mut want = v.clone();
                want.sort_unstable_by(f64::total_cmp);
                let bits = |x: &[f64]| x.iter().map(|f| f.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&sorted(v.iter().copied())), bits(&want), "n = {n}");
            }
        }
    }

    #[test]
    fn keys_round_trip() {
        for x in [
            0.0,
            -0.0,
            1.0,
            -1.0,
            f64::MAX,
            f64::MIN,
            1e-310,
            -1e-310,
            f64::INFINITY,
        ] {
            assert_eq!(value(key(x)).to_bits(), x.to_bits());
        }
    }
}
