//! Values for [`LANES`] rays side by side, and the few operations the packet tracer needs.
//!
//! Each operation is a plain loop over the lanes, written so that after inlining it becomes
//! one SIMD instruction (AVX2 holds four f64). Flags are 64-bit masks (all ones for true),
//! like the results of SIMD compares, so that they stay in vector registers; `bool` arrays
//! would be unpacked to bytes between statements.

/// Rays per packet: four f64 lanes fill an AVX register.
pub const LANES: usize = 4;

/// One f64 per lane.
pub type F = [f64; LANES];

/// One flag per lane: all bits set for true, none for false.
pub type M = [u64; LANES];

/// `f` evaluated for every lane.
#[inline(always)]
pub fn lanes(f: impl Fn(usize) -> f64) -> F {
    std::array::from_fn(f)
}

/// The flag `f` for every lane.
#[inline(always)]
pub fn mask(f: impl Fn(usize) -> bool) -> M {
    std::array::from_fn(|l| u64::from(f(l)).wrapping_neg())
}

/// Lane-wise a ∧ b.
#[inline(always)]
pub fn and(a: M, b: M) -> M {
    std::array::from_fn(|l| a[l] & b[l])
}

/// Lane-wise a ∨ b.
#[inline(always)]
pub fn or(a: M, b: M) -> M {
    std::array::from_fn(|l| a[l] | b[l])
}

/// Lane-wise a ∧ ¬b.
#[inline(always)]
pub fn and_not(a: M, b: M) -> M {
    std::array::from_fn(|l| a[l] & !b[l])
}

/// `a` where `m` is set, `b` elsewhere.
#[inline(always)]
pub fn pick(m: M, a: F, b: F) -> F {
    std::array::from_fn(|l| f64::from_bits((a[l].to_bits() & m[l]) | (b[l].to_bits() & !m[l])))
}

/// Whether lane `l` of `m` is set.
#[inline(always)]
pub fn on(m: &M, l: usize) -> bool {
    m[l] != 0
}

/// Whether any lane of `m` is set.
#[inline(always)]
pub fn any(m: &M) -> bool {
    m.iter().fold(0, |a, &b| a | b) != 0
}

/// Whether every lane of `m` is set.
#[inline(always)]
pub fn every(m: &M) -> bool {
    m.iter().fold(u64::MAX, |a, &b| a & b) != 0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn masks_select_and_combine_lane_by_lane() {
        let a = [1.0, 2.0, 3.0, 4.0];
        let b = [-1.0, -2.0, -3.0, -4.0];
        let m = mask(|l| a[l] > 2.5);
        assert_eq!(m, [0, 0, u64::MAX, u64::MAX]);
        assert_eq!(pick(m, a, b), [-1.0, -2.0, 3.0, 4.0]);
        let odd = mask(|l| l % 2 == 1);
        assert_eq!(and(m, odd), [0, 0, 0, u64::MAX]);
        assert_eq!(or(m, odd), [0, u64::MAX, u64::MAX, u64::MAX]);
        assert_eq!(and_not(m, odd), [0, 0, u64::MAX, 0]);
        assert!(on(&m, 2) && !on(&m, 1));
        assert!(any(&odd) && !any(&mask(|_| false)));
        assert!(every(&mask(|_| true)) && !every(&odd) && !every(&m));
        // Selection keeps every bit, signed zeros and infinities included.
        let z = pick(mask(|l| l == 0), [-0.0, 0.0, 0.0, 0.0], [f64::INFINITY; 4]);
        assert!(z[0].is_sign_negative() && z[0] == 0.0 && z[1].is_infinite());
    }
}
