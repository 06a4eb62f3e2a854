//! Rounding-error-aware origin offsets for rays leaving a facet.

use super::Vec3;
use super::lanes::{F, LANES, lanes};

/// Start point for a ray leaving a facet: `p` moved along the normal `n` past its error box
/// `p_err`, to the side `dir` points to, then one ulp further per coordinate
/// (`f64::next_up`/`next_down`), so the new ray cannot re-hit the facet through round-off.
///
/// Offset construction after M. Pharr, W. Jakob & G. Humphreys, *Physically Based
/// Rendering*, 4th ed. (2023), §6.8.6.
#[inline]
pub fn offset_origin(p: Vec3, p_err: Vec3, n: Vec3, dir: Vec3) -> Vec3 {
    let d = n.abs().dot(p_err);
    let mut offset = n * d;
    if dir.dot(n) < 0.0 {
        offset = -offset;
    }
    let po = p + offset;
    Vec3::new(
        ulp_step(po.x, offset.x),
        ulp_step(po.y, offset.y),
        ulp_step(po.z, offset.z),
    )
}

/// [`offset_origin`] for [`LANES`] rays at once (coordinates as lanes): the same bits.
#[inline(always)]
pub fn offset_origin_lanes(p: &[F; 3], p_err: &[F; 3], n: &[F; 3], dir: &[F; 3]) -> [F; 3] {
    let d = lanes(|l| {
        (n[0][l].abs() * p_err[0][l] + n[1][l].abs() * p_err[1][l]) + n[2][l].abs() * p_err[2][l]
    });
    let dot = lanes(|l| (dir[0][l] * n[0][l] + dir[1][l] * n[1][l]) + dir[2][l] * n[2][l]);
    let sign = lanes(|l| if dot[l] < 0.0 { -1.0 } else { 1.0 });
    let mut o = [[0.0; LANES]; 3];
    for c in 0..3 {
        for l in 0..LANES {
            // (−(n·d) and (−1)·(n·d) are the same bits)
            let offset = sign[l] * (n[c][l] * d[l]);
            o[c][l] = ulp_step(p[c][l] + offset, offset);
        }
    }
    o
}

/// `v` moved one ulp towards +∞ if `o` > 0, towards −∞ if `o` < 0, else `v` itself: for
/// finite `v`, `f64::next_up` / `f64::next_down` to the bit, by an integer step on the bits
/// without branches (the sign of the offset is unpredictable, and a branch on it was
/// mispredicted about every other call).
#[inline(always)]
fn ulp_step(v: f64, o: f64) -> f64 {
    const SIGN: u64 = 1 << 63;
    let (up, down) = (o > 0.0, o < 0.0);
    // A zero takes the sign of the step: the step below then leads away from zero.
    let bits = if v == 0.0 {
        if down { SIGN } else { 0 }
    } else {
        v.to_bits()
    };
    // The magnitude grows when the step and `v` have the same sign, else it shrinks.
    let grows = up != (bits & SIGN != 0);
    let delta = if grows { 1 } else { u64::MAX };
    let moved = f64::from_bits(bits.wrapping_add(delta));
    if up || down { moved } else { v }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ulp_step_is_next_up_and_next_down() {
        // The bit step against the standard library's `next_up`/`next_down` (Rust std), on
        // zeros of both signs, subnormals, the largest finite values and random magnitudes.
        let mut rng = crate::sampling::Stream::new(3, 1, 4);
        let mut values = vec![
            0.0,
            -0.0,
            f64::from_bits(1),
            -f64::from_bits(1),
            f64::MIN_POSITIVE,
            -f64::MIN_POSITIVE,
            f64::MAX,
            f64::MIN,
            1.0,
            -1.0,
        ];
        for _ in 0..10_000 {
            let x = (rng.uniform() - 0.5) * 10f64.powf(60.0 * (rng.uniform() - 0.5));
            values.push(x);
        }
        for &v in &values {
            for o in [1e-300, -1e-300, 0.0, -0.0, 3.0, -3.0] {
                let want = if o > 0.0 {
                    v.next_up()
                } else if o < 0.0 {
                    v.next_down()
                } else {
                    v
                };
                assert_eq!(ulp_step(v, o).to_bits(), want.to_bits(), "{v:e}, {o:e}");
            }
        }
    }

    #[test]
    fn lane_offsets_equal_the_one_ray_offsets() {
        // Common practice, no source: the lane form must give the same bits.
        let mut rng = crate::sampling::Stream::new(3, 1, 5);
        let mut v = || rng.uniform() - 0.5;
        for _ in 0..2000 {
            let mut p = [[0.0; 4]; 3];
            let mut e = [[0.0; 4]; 3];
            let mut n = [[0.0; 4]; 3];
            let mut d = [[0.0; 4]; 3];
            let mut want = [Vec3::ZERO; 4];
            for l in 0..4 {
                let pl = Vec3::new(40.0 * v(), 40.0 * v(), 3.0 * v());
                let el = Vec3::new(v().abs(), v().abs(), v().abs()) * 1e-14;
                // normals with exact zeros, as pyramid faces have
                let nl = match l {
                    0 => Vec3::new(0.8, 0.0, 0.6),
                    1 => Vec3::new(0.0, -0.6, 0.8),
                    _ => Vec3::new(v(), v(), v().abs() + 0.1).normalize(),
                };
                let dl = Vec3::new(v(), v(), v()).normalize();
                want[l] = offset_origin(pl, el, nl, dl);
                for c in 0..3 {
                    (p[c][l], e[c][l], n[c][l], d[c][l]) = (pl[c], el[c], nl[c], dl[c]);
                }
            }
            let got = offset_origin_lanes(&p, &e, &n, &d);
            for (l, w) in want.iter().enumerate() {
                for c in 0..3 {
                    assert_eq!(got[c][l].to_bits(), w[c].to_bits());
                }
            }
        }
    }

    #[test]
    fn offset_moves_to_the_side_of_dir() {
        let n = Vec3::new(0.0, 0.6, 0.8);
        let p = Vec3::new(1.0, 2.0, 3.0);
        let err = Vec3::splat(1e-12);
        let up = offset_origin(p, err, n, n);
        let down = offset_origin(p, err, n, -n);
        assert!((up - p).dot(n) > 0.0);
        assert!((down - p).dot(n) < 0.0);
        // The offset exceeds the error box projected on the normal.
        assert!((up - p).dot(n) >= n.abs().dot(err));
    }
}
