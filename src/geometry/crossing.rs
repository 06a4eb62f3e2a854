//! Crossings of a ray with a height-field surface assembled from planes by min and max.
//!
//! Within one lattice cell a texture's surface is z = f(x, y), with f a max/min combination of
//! non-vertical planes z = a·x + b·y + w (for example an upright pyramid on its base plane is
//! `max(0, min(four faces))`). Along a ray p(t) = o + t·d each plane gives a linear vertical
//! gap G(t) = z(t) − plane(x(t), y(t)) = c + e·t, so the set of t where the ray lies below the
//! surface is a union/intersection of half-lines of t, each bounded by one root −c/e computed
//! once. A crossing is the first t of the target set (below the surface for a ray coming from
//! above, above it for a ray coming from below) inside the cell's parameter interval
//! [lo, hi]; grid cells share their boundary t values bit for bit (see [`super::grid`]).
//!
//! Why this is watertight: whether the ray is above or below the surface is decided from the
//! same rounded roots wherever the question is asked, and a ray that starts above and ends below
//! the surface must change set somewhere on the partition of t into cell intervals. No second,
//! independently rounded point-in-facet test exists that could disagree with the first (the
//! usual cause of leaks through edges and valleys). Where two facets meet, the root that comes
//! first along the ray owns the crossing — a consistent ownership rule in the ray's parameter,
//! the one-dimensional counterpart of the half-plane rule of S. Woop, C. Benthin & I. Wald,
//! "Watertight ray/triangle intersection", JCGT 2(1), 65 (2013).
//!
//! Invariant: a crossing within the rounding error of t = 0 is never reported; the origin is
//! then taken to lie on the plane and the ray to be on the side its direction points to.
//! Not here: which planes form a cell (`texture`), wrapping into the unit cell (`texture`).

use super::{Vec3, gamma};

/// A non-vertical plane z = a·x + b·y + w in a cell's local frame (µm).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct HeightPlane {
    /// ∂z/∂x.
    pub a: f64,
    /// ∂z/∂y.
    pub b: f64,
    /// Height at the local origin, µm.
    pub w: f64,
}

impl HeightPlane {
    /// The base plane z = 0.
    pub const GROUND: HeightPlane = HeightPlane {
        a: 0.0,
        b: 0.0,
        w: 0.0,
    };

    /// Height of the plane at (x, y), µm.
    #[inline(always)]
    pub fn z_at(&self, x: f64, y: f64) -> f64 {
        self.a * x + self.b * y + self.w
    }

    /// Unit normal pointing up (+z).
    #[inline]
    pub fn normal(&self) -> Vec3 {
        Vec3::new(-self.a, -self.b, 1.0).normalize()
    }

    /// Bound on the rounding error of [`HeightPlane::z_at`] at (x, y), µm.
    #[inline]
    pub fn z_err(&self, x: f64, y: f64) -> f64 {
        gamma(3) * ((self.a * x).abs() + (self.b * y).abs() + self.w.abs())
    }
}

/// dG/dt of a plane along a ray direction and its reciprocal, computed once per ray.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Slope {
    /// dG/dt = d_z − (a·d_x + b·d_y).
    pub e: f64,
    /// 1/e (±∞ when e = 0).
    pub inv: f64,
}

impl Slope {
    /// Slope of the gap to plane `p` along direction `d`.
    #[inline(always)]
    pub fn of(p: &HeightPlane, d: Vec3) -> Slope {
        let e = d.z - (p.a * d.x + p.b * d.y);
        Slope { e, inv: 1.0 / e }
    }
}

/// The four faces of square pyramids with sides along x and y and facet slope tan α, along
/// one ray: slopes computed once per ray, gaps per pyramid from the apex height alone.
///
/// Faces, in order: 0 on the +x side of the axis, 1 on −x, 2 on +y, 3 on −y. Upright
/// (z = H − tan α·‖(x, y) − c‖∞): face 0 is z = H − tan α·(x − cx). Inverted pit of depth H
/// (z = tan α·‖(x, y) − c‖∞ − H): face 0 is z = tan α·(x − cx) − H. The gaps equal those of
/// [`Gap::new`] for the same planes up to rounding, and use the same on-plane rule.
#[derive(Clone, Copy, Debug)]
pub struct SquareFaces {
    tan: f64,
    slopes: [Slope; 4],
    inverted: bool,
}

impl SquareFaces {
    /// Set-up for facet slope `tan` (> 0) and ray direction `d`.
    #[inline(always)]
    pub fn new(tan: f64, d: Vec3, inverted: bool) -> SquareFaces {
        let (tx, ty) = if inverted {
            (-tan * d.x, -tan * d.y)
        } else {
            (tan * d.x, tan * d.y)
        };
        let sl = |e: f64| Slope { e, inv: 1.0 / e };
        SquareFaces {
            tan,
            slopes: [sl(d.z + tx), sl(d.z - tx), sl(d.z + ty), sl(d.z - ty)],
            inverted,
        }
    }

    /// The facet slope tan α.
    #[inline(always)]
    pub fn tan(&self) -> f64 {
        self.tan
    }

    /// Gaps to the four faces of the pyramid whose axis passes through the origin's local
    /// (x, y) = (`dx`, `dy`) from it, apex height (or pit depth) `h`; `oz` is the origin's z.
    #[inline(always)]
    pub fn gaps(&self, dx: f64, dy: f64, oz: f64, h: f64, tol_abs: f64) -> [Gap; 4] {
        let (u, v) = (self.tan * dx, self.tan * dy);
        let (q, u, v) = if self.inverted {
            (oz + h, -u, -v)
        } else {
            (oz - h, u, v)
        };
        let err = (gamma(6) * (oz.abs() + h.abs() + u.abs() + v.abs())).max(tol_abs);
        let c = [q + u, q - u, q + v, q - v];
        let s = &self.slopes;
        let gap = |k: usize| Gap {
            c: if c[k].abs() <= err { 0.0 } else { c[k] },
            e: s[k].e,
            inv: s[k].inv,
        };
        [gap(0), gap(1), gap(2), gap(3)]
    }
}

/// The vertical gap G(t) = z(t) − plane(x(t), y(t)) = c + e·t between a ray and a plane.
/// G > 0: the ray is above the plane.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Gap {
    /// G(0), µm; exactly 0 when the origin lies on the plane within rounding error.
    pub c: f64,
    /// dG/dt, the direction's component along the unnormalised up normal (−a, −b, 1).
    pub e: f64,
    /// 1/e (roots are −c·inv; ±∞ when e = 0).
    pub inv: f64,
}

impl Gap {
    /// Gap of the ray (`o` in the plane's local frame, `d` the direction) to plane `p`.
    ///
    /// On-plane rule: when |G(0)| does not exceed its tolerance, G(0) is set to 0, so the ray
    /// counts as leaving the plane to the side `d` points to and a root within that tolerance
    /// of t = 0 is not a crossing ("a hit counts only if t exceeds its error bound"). The
    /// tolerance is the larger of the rounding-error bound of G(0) (γ₆ times the sum of the
    /// magnitudes of its terms; Higham 2002, Lemma 3.1, with one extra rounding for the shift
    /// of `o` into the local frame) and `tol_abs`, the texture's bound on how far an origin
    /// offset from a previous hit ([`super::robust::offset_origin`]) can be from the surface
    /// — which matters at valleys, where the offset along one facet's normal moves the origin
    /// towards the neighbouring facet's plane.
    #[inline]
    pub fn new(p: &HeightPlane, o: Vec3, d: Vec3, tol_abs: f64) -> Gap {
        Gap::with_slope(p, o, Slope::of(p, d), tol_abs)
    }

    /// As [`Gap::new`], with the slope along the ray computed beforehand (once per ray).
    #[inline(always)]
    pub fn with_slope(p: &HeightPlane, o: Vec3, slope: Slope, tol_abs: f64) -> Gap {
        let ax = p.a * o.x;
        let by = p.b * o.y;
        let c = o.z - (ax + by + p.w);
        let err = (gamma(6) * (o.z.abs() + ax.abs() + by.abs() + p.w.abs())).max(tol_abs);
        Gap {
            c: if c.abs() <= err { 0.0 } else { c },
            e: slope.e,
            inv: slope.inv,
        }
    }

    /// The same plane, with the origin declared to lie on it (used for the facet a ray leaves).
    #[inline(always)]
    pub fn on_plane(self) -> Gap {
        Gap { c: 0.0, ..self }
    }

    /// G(t).
    #[inline(always)]
    pub fn at(self, t: f64) -> f64 {
        self.c + self.e * t
    }

    /// The half-line {t : G(t) < 0} (ray below the plane) as a span tagged `tag`.
    #[inline(always)]
    pub fn below(self, tag: u32) -> Span {
        if self.e > 0.0 {
            Span::new(f64::NEG_INFINITY, -self.c * self.inv, tag, self.e.abs())
        } else if self.e < 0.0 {
            Span::new(-self.c * self.inv, f64::INFINITY, tag, self.e.abs())
        } else if self.c < 0.0 {
            Span::new(f64::NEG_INFINITY, f64::INFINITY, tag, 0.0)
        } else {
            Span::EMPTY
        }
    }

    /// The half-line {t : G(t) ≥ 0} (ray on or above the plane) as a span tagged `tag`.
    #[inline(always)]
    pub fn above(self, tag: u32) -> Span {
        if self.e > 0.0 {
            Span::new(-self.c * self.inv, f64::INFINITY, tag, self.e.abs())
        } else if self.e < 0.0 {
            Span::new(f64::NEG_INFINITY, -self.c * self.inv, tag, self.e.abs())
        } else if self.c >= 0.0 {
            Span::new(f64::NEG_INFINITY, f64::INFINITY, tag, 0.0)
        } else {
            Span::EMPTY
        }
    }
}

/// A half-open interval [start, end) of the ray parameter; each end carries the tag of the
/// plane that bounds it (empty when start ≥ end).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Span {
    /// First t inside.
    pub start: f64,
    /// First t past the end.
    pub end: f64,
    /// Plane whose root is `start`.
    pub start_tag: u32,
    /// Plane whose root is `end`.
    pub end_tag: u32,
    /// |dG/dt| of the plane at `start` (how fast the ray moves away from it), µm per unit t.
    pub start_rate: f64,
    /// |dG/dt| of the plane at `end`.
    pub end_rate: f64,
}

impl Span {
    /// The empty span.
    pub const EMPTY: Span = Span {
        start: f64::INFINITY,
        end: f64::NEG_INFINITY,
        start_tag: u32::MAX,
        end_tag: u32::MAX,
        start_rate: f64::INFINITY,
        end_rate: f64::INFINITY,
    };

    /// The whole line, to be narrowed by [`Span::and`].
    pub const ALL: Span = Span {
        start: f64::NEG_INFINITY,
        end: f64::INFINITY,
        start_tag: u32::MAX,
        end_tag: u32::MAX,
        start_rate: f64::INFINITY,
        end_rate: f64::INFINITY,
    };

    #[inline(always)]
    fn new(start: f64, end: f64, tag: u32, rate: f64) -> Span {
        Span {
            start,
            end,
            start_tag: tag,
            end_tag: tag,
            start_rate: rate,
            end_rate: rate,
        }
    }

    /// True when no t lies inside.
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.start >= self.end
    }

    /// Intersection (the clipping step of Cyrus–Beck: latest start, earliest end). On a tie
    /// the tag already held is kept, so ownership of an edge follows the plane order.
    #[inline(always)]
    pub fn and(self, o: Span) -> Span {
        let (start, start_tag, start_rate) = if o.start > self.start {
            (o.start, o.start_tag, o.start_rate)
        } else {
            (self.start, self.start_tag, self.start_rate)
        };
        let (end, end_tag, end_rate) = if o.end < self.end {
            (o.end, o.end_tag, o.end_rate)
        } else {
            (self.end, self.end_tag, self.end_rate)
        };
        Span {
            start,
            end,
            start_tag,
            end_tag,
            start_rate,
            end_rate,
        }
    }

    /// First t ≥ `lo` inside the span, if any.
    #[inline(always)]
    pub fn first_from(&self, lo: f64) -> Option<f64> {
        let t = self.start.max(lo);
        (t < self.end).then_some(t)
    }
}

/// Where a ray first enters a target set within a cell interval.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Entry {
    /// Ray parameter.
    pub t: f64,
    /// Tag of the plane crossed. When the ray was already inside the set at `lo` (a crossing
    /// on the cell's side wall, or at the origin), the plane of the most recent boundary of
    /// the set before `lo` — it faces the ray the right way by construction; `None` when no
    /// finite boundary exists (the texture then looks at the facet under the ray).
    pub tag: Option<u32>,
    /// True when the ray was already inside the set at `lo` (then `t == lo`).
    pub inside_at_lo: bool,
    /// |dG/dt| of the tagged plane (∞ when unknown): how fast the ray moves away from it.
    pub rate: f64,
    /// Root of the tagged plane (≤ t; −∞ when unknown): since when the ray is in the set.
    pub since: f64,
    /// End of the entered span and |dG/dt| of its plane (entries into a union only; ∞
    /// otherwise): the ray stays in the set at least until then.
    pub span_end: f64,
    /// |dG/dt| of the plane at `span_end`.
    pub span_end_rate: f64,
}

/// First t in [lo, hi] inside the union of `spans`.
#[inline(always)]
pub fn first_in_union(spans: &[Span], lo: f64, hi: f64) -> Option<Entry> {
    let mut best: Option<Entry> = None;
    for s in spans {
        if let Some(t) = s.first_from(lo)
            && t <= hi
            && best.is_none_or(|b| t < b.t)
        {
            let tag = s.start.is_finite().then_some(s.start_tag);
            let rate = if tag.is_some() {
                s.start_rate
            } else {
                f64::INFINITY
            };
            best = Some(Entry {
                t,
                tag,
                inside_at_lo: s.start < lo,
                rate,
                since: s.start,
                span_end: s.end,
                span_end_rate: s.end_rate,
            });
        }
    }
    best
}

/// First t in [lo, hi] outside the union of `spans` (the ray leaves every span).
#[inline(always)]
pub fn first_outside_union(spans: &[Span], lo: f64, hi: f64) -> Option<Entry> {
    let mut t = lo;
    let mut tag = None;
    let mut rate = f64::INFINITY;
    let mut since = f64::NEG_INFINITY;
    let mut moved_ever = false;
    // Each pass either moves t strictly forward to the end of a span containing it or stops;
    // at most `spans.len()` passes move it.
    for _ in 0..=spans.len() {
        let mut moved = false;
        for s in spans {
            if s.start <= t && t < s.end {
                t = s.end;
                tag = Some(s.end_tag);
                rate = s.end_rate;
                since = s.end;
                moved = true;
                moved_ever = true;
            }
        }
        if !moved || t > hi {
            break;
        }
    }
    if tag.is_none() {
        // Already outside at `lo`: the latest finite end of a span (possibly of zero length,
        // a touch at `lo`) is the plane the ray left through.
        let mut latest = f64::NEG_INFINITY;
        for s in spans {
            if s.start <= s.end && s.end <= lo && s.end.is_finite() && s.end > latest {
                latest = s.end;
                tag = Some(s.end_tag);
                rate = s.end_rate;
                since = s.end;
            }
        }
    }
    (t <= hi).then_some(Entry {
        t,
        tag,
        inside_at_lo: !moved_ever,
        rate,
        since,
        span_end: f64::INFINITY,
        span_end_rate: f64::INFINITY,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn below_and_above_are_complementary_for_any_direction() {
        let p = HeightPlane {
            a: 0.3,
            b: -0.2,
            w: 1.0,
        };
        for (o, d) in [
            (Vec3::new(0.1, 0.2, 3.0), Vec3::new(0.0, 0.0, -1.0)),
            (Vec3::new(0.1, 0.2, -3.0), Vec3::new(0.6, 0.0, 0.8)),
            (Vec3::new(0.1, 0.2, 2.0), Vec3::new(1.0, 0.0, 0.0)),
        ] {
            let g = Gap::new(&p, o, d, 0.0);
            for t in [-5.0, -0.1, 0.0, 0.7, 4.0, 9.0] {
                let b = g.below(0);
                let a = g.above(0);
                let in_b = b.start <= t && t < b.end;
                let in_a = a.start <= t && t < a.end;
                assert!(in_a != in_b, "t = {t}: exactly one side");
                // Agrees with the sign of the gap away from the root.
                let z = o.z + t * d.z - p.z_at(o.x + t * d.x, o.y + t * d.y);
                if z.abs() > 1e-9 {
                    assert_eq!(in_b, z < 0.0);
                }
            }
        }
    }

    #[test]
    fn origin_on_plane_counts_as_leaving_to_the_direction_side() {
        let p = HeightPlane {
            a: 1.0,
            b: 0.0,
            w: 0.0,
        };
        let o = Vec3::new(0.1, 0.0, 0.1); // on z = x
        let up = Gap::new(&p, o, Vec3::new(-0.6, 0.0, 0.8), 0.0);
        let down = Gap::new(&p, o, Vec3::new(0.6, 0.0, -0.8), 0.0);
        assert_eq!(up.c, 0.0);
        assert!(
            up.below(0).first_from(0.0).is_none(),
            "moving up: never below for t ≥ 0"
        );
        assert_eq!(
            down.below(0).first_from(0.0),
            Some(0.0),
            "moving down: below from 0+"
        );
    }

    #[test]
    fn union_and_complement_entries() {
        let s1 = Span {
            start: 1.0,
            end: 3.0,
            start_tag: 1,
            end_tag: 11,
            start_rate: 1.0,
            end_rate: 1.0,
        };
        let s2 = Span {
            start: 2.0,
            end: 5.0,
            start_tag: 2,
            end_tag: 22,
            start_rate: 1.0,
            end_rate: 1.0,
        };
        let e = first_in_union(&[s1, s2], 0.0, 10.0).unwrap();
        assert_eq!((e.t, e.tag), (1.0, Some(1)));
        let e = first_in_union(&[s1, s2], 1.5, 10.0).unwrap();
        assert_eq!(
            (e.t, e.tag),
            (1.5, Some(1)),
            "inside since t = 1: entered through 1"
        );
        assert!(first_in_union(&[s1, s2], 0.0, 0.5).is_none());
        let e = first_outside_union(&[s2, s1], 1.5, 10.0).unwrap();
        assert_eq!((e.t, e.tag), (5.0, Some(22)));
        assert!(first_outside_union(&[s2, s1], 1.5, 4.0).is_none());
        let e = first_outside_union(&[s1], 0.5, 4.0).unwrap();
        assert_eq!((e.t, e.tag), (0.5, None), "never inside: no boundary");
        let e = first_outside_union(&[s1], 3.5, 4.0).unwrap();
        assert_eq!((e.t, e.tag), (3.5, Some(11)), "left through 11 at t = 3");
    }
}
