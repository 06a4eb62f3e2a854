//! Rounding-error-aware origin offsets for rays leaving a facet.

use super::Vec3;

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
    // Both neighbours computed, then chosen: the sign of the offset is unpredictable, a
    // branch on it would be mispredicted about every other call.
    let bump = |v: f64, o: f64| {
        let (up, down) = (v.next_up(), v.next_down());
        let low = if o < 0.0 { down } else { v };
        if o > 0.0 { up } else { low }
    };
    Vec3::new(
        bump(po.x, offset.x),
        bump(po.y, offset.y),
        bump(po.z, offset.z),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

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
