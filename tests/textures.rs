//! Texture geometry against published ray paths and against independent statistics.
//!
//! Sources: regular upright {111} pyramids under vertical light — first incidence at
//! α = atan √2 = 54.74°, second at 180° − 3α = 15.79°, and 1/9 of the rays meet a third facet:
//! S. C. Baker-Finch & K. R. McIntosh, "Reflection of normally incident light from silicon
//! solar cells with pyramidal texture", Prog. Photovolt. 19, 406 (2011) (the 1/9 fraction
//! from memory). Random tiles: the Boolean model of D. Stoyan, W. S. Kendall & J. Mecke,
//! *Stochastic Geometry and its Applications*, 2nd ed., Wiley (1995), §3.1 (vacancy of iid
//! uniform squares on a torus: Πᵢ(1 − bᵢ²/L²)); truncated normal moments: N. L. Johnson,
//! S. Kotz & N. Balakrishnan, *Continuous Univariate Distributions* vol. 1, 2nd ed., Wiley
//! (1994), §10.1. Height map: the committed PNG is re-made by its generator below.

use std::path::{Path, PathBuf};

use lightfold::geometry::robust::offset_origin;
use lightfold::geometry::{FacetId, Hit, Vec3};
use lightfold::sampling::Stream;
use lightfold::texture::pyramids::RegularPyramidsSpec;
use lightfold::texture::random::{RandomPyramidsSpec, SizeDistribution, SizeOf};
use lightfold::texture::{
    self, HeightMap, RandomPyramids, RegularPyramids, SurfaceKind, Texture, TextureError, VGrooves,
};

fn geometries() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("geometries")
}

/// Mirror reflection of `d` about the unit normal `n`.
fn reflect(d: Vec3, n: Vec3) -> Vec3 {
    (d - 2.0 * d.dot(n) * n).normalize()
}

/// Incidence angle (degrees) of direction `d` on a facet with up normal `n`, from either side.
fn incidence_deg(d: Vec3, n: Vec3) -> f64 {
    d.dot(n).abs().min(1.0).acos().to_degrees()
}

/// Follows pure specular reflections from the side above the surface; returns the hits.
fn specular_path(tex: &dyn Texture, origin: Vec3, dir: Vec3) -> Vec<Hit> {
    let mut hits = Vec::new();
    let (mut o, mut d, mut skip) = (origin, dir, None);
    while let Some(h) = tex.intersect(o, d, skip) {
        hits.push(h);
        d = reflect(d, h.normal);
        o = offset_origin(h.point, h.p_err, h.normal, d);
        skip = Some(h.facet);
        assert!(hits.len() < 20, "runaway path");
    }
    hits
}

fn alpha_111_deg() -> f64 {
    2f64.sqrt().atan().to_degrees()
}

#[test]
fn vertical_ray_on_upright_111_pyramids_meets_54_74_then_15_79_degrees() {
    let tex = RegularPyramids::new(RegularPyramidsSpec::upright(10.0)).unwrap();
    let alpha = alpha_111_deg();
    // Start over the +x facet (centre at 5, 5), away from edges.
    let hits = specular_path(&tex, Vec3::new(7.0, 5.3, 20.0), Vec3::NEG_Z);
    assert!(hits.len() >= 2, "{} hits", hits.len());
    let d0 = Vec3::NEG_Z;
    assert!(
        (incidence_deg(d0, hits[0].normal) - alpha).abs() < 1e-9,
        "first incidence"
    );
    assert!(hits[0].normal.x > 0.0, "+x facet first");
    // By hand: n₁ = (sin α, 0, cos α); d₁ = d₀ − 2(d₀·n₁)n₁ = (sin 2α, 0, cos 2α), going +x and
    // down (cos 2α = −1/3); it meets the −x facet of the next pyramid, n₂ = (−sin α, 0, cos α):
    // cos θ₂ = |d₁·n₂| = |−sin 2α sin α + cos 2α cos α| = |cos 3α|, θ₂ = 180° − 3α.
    let d1 = reflect(d0, hits[0].normal);
    let a = alpha.to_radians();
    assert!((d1 - Vec3::new((2.0 * a).sin(), 0.0, (2.0 * a).cos())).length() < 1e-12);
    let theta2 = incidence_deg(d1, hits[1].normal);
    assert!(
        (theta2 - (180.0 - 3.0 * alpha)).abs() < 1e-9,
        "second incidence {theta2}°"
    );
    assert!((theta2 - 15.79).abs() < 0.005);
    assert!(hits[1].normal.x < 0.0, "−x facet of the neighbour second");
}

#[test]
fn one_ninth_of_vertical_rays_meet_a_third_facet_on_upright_pyramids() {
    let tex = RegularPyramids::new(RegularPyramidsSpec::upright(10.0)).unwrap();
    let mut s = Stream::new(2011, 406, 0);
    let n = 200_000;
    let mut third = 0usize;
    let mut max_hits = 0;
    for _ in 0..n {
        let o = Vec3::new(10.0 * s.uniform(), 10.0 * s.uniform(), 20.0);
        let hits = specular_path(&tex, o, Vec3::NEG_Z);
        assert!(
            hits.len() >= 2,
            "every vertical ray meets at least two facets"
        );
        if hits.len() >= 3 {
            third += 1;
        }
        max_hits = max_hits.max(hits.len());
    }
    let p = third as f64 / n as f64;
    let sigma = ((1.0 / 9.0) * (8.0 / 9.0) / n as f64).sqrt();
    assert!(
        (p - 1.0 / 9.0).abs() < 4.0 * sigma,
        "third-facet fraction {p}, expected 1/9 ± {}",
        4.0 * sigma
    );
    assert_eq!(max_hits, 3, "no ray needs a fourth facet");
}

#[test]
fn inverted_pits_reflect_into_the_opposite_facet_and_gaps_are_flat() {
    let spec = RegularPyramidsSpec::inverted(9.0, 10.0);
    let tex = RegularPyramids::new(spec).unwrap();
    let alpha = alpha_111_deg();
    let h = tex.height_um();
    assert!((h - 4.5 * alpha.to_radians().tan()).abs() < 1e-12);
    assert_eq!(tex.z_range_um(), [-h, 0.0]);
    // Into the +x facet of the pit (centre 5, 5): depth tan α · 2 − h.
    let hits = specular_path(&tex, Vec3::new(7.0, 5.2, 5.0), Vec3::NEG_Z);
    assert!(hits.len() >= 2);
    assert!((hits[0].point.z - (2.0 * alpha.to_radians().tan() - h)).abs() < 1e-12);
    assert!(hits[0].normal.x < 0.0, "pit facet on +x faces −x");
    assert!((incidence_deg(Vec3::NEG_Z, hits[0].normal) - alpha).abs() < 1e-9);
    let d1 = reflect(Vec3::NEG_Z, hits[0].normal);
    assert!(hits[1].normal.x > 0.0, "the opposite facet");
    assert!((incidence_deg(d1, hits[1].normal) - (180.0 - 3.0 * alpha)).abs() < 1e-9);
    // The 1 µm gap between pits is the flat base plane z = 0 (facet 4).
    let g = tex
        .intersect(Vec3::new(0.2, 3.0, 5.0), Vec3::NEG_Z, None)
        .unwrap();
    assert_eq!(g.facet, FacetId(4));
    assert_eq!(g.point.z, 0.0);
    assert_eq!(g.normal, Vec3::Z);
}

#[test]
fn rotated_lattice_keeps_hits_in_the_rotated_cell() {
    let spec = RegularPyramidsSpec {
        rotation_deg: 30.0,
        period_um: 12.0,
        ..RegularPyramidsSpec::upright(10.0)
    };
    let tex = RegularPyramids::new(spec).unwrap();
    let [a, b] = tex.lattice_um();
    let det = a[0] * b[1] - a[1] * b[0];
    let mut s = Stream::new(5, 0, 0);
    for _ in 0..10_000 {
        let (u, v) = (s.uniform(), s.uniform());
        let o = Vec3::new(u * a[0] + v * b[0], u * a[1] + v * b[1], 20.0);
        let d = Vec3::new(0.3 * (s.uniform() - 0.5), 0.3 * (s.uniform() - 0.5), -1.0).normalize();
        let h = tex.intersect(o, d, None).unwrap();
        let (x, y) = (h.point.x, h.point.y);
        let hu = (x * b[1] - y * b[0]) / det;
        let hv = (a[0] * y - a[1] * x) / det;
        assert!(
            (-1e-12..1.0 + 1e-12).contains(&hu) && (-1e-12..1.0 + 1e-12).contains(&hv),
            "({hu}, {hv})"
        );
        // Height in the lattice frame matches the analytic profile.
        let (lx, ly) = (hu * 12.0, hv * 12.0);
        assert!((h.point.z - tex.height_at(lx, ly)).abs() < 1e-9);
    }
}

#[test]
fn v_grooves_vertical_light_meets_alpha_then_180_minus_3_alpha() {
    let tex = VGrooves::si_111(6.0).unwrap();
    let alpha = alpha_111_deg();
    assert!((tex.height_um() - 3.0 * alpha.to_radians().tan()).abs() < 1e-12);
    // Rising facet (x < 3): its normal tilts to −x; reflection goes −x into the falling facet
    // of the previous groove, the same two-facet geometry as the pyramids' cross-section.
    let hits = specular_path(&tex, Vec3::new(1.0, 2.0, 10.0), Vec3::NEG_Z);
    assert!(hits.len() >= 2);
    assert_eq!(hits[0].facet, FacetId(0));
    assert!((hits[0].point.z - alpha.to_radians().tan()).abs() < 1e-12);
    let d1 = reflect(Vec3::NEG_Z, hits[0].normal);
    assert_eq!(hits[1].facet, FacetId(1));
    assert!((incidence_deg(d1, hits[1].normal) - (180.0 - 3.0 * alpha)).abs() < 1e-9);
    assert!(
        hits[1].point.x > 3.0,
        "wrapped into the cell: {}",
        hits[1].point.x
    );
}

fn sample_mean_var(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    (
        m,
        v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0),
    )
}

#[test]
fn random_tile_sizes_and_facet_angles_follow_the_input_distributions() {
    let spec = RandomPyramidsSpec {
        angle_spread_deg: 2.0,
        pyramid_count: 3000,
        ..RandomPyramidsSpec::log_normal_height(3.0, 0.4, 17)
    };
    let tex = RandomPyramids::new(spec).unwrap();
    let n = tex.pyramids().len() as f64;
    // Log-normal heights: ln H ~ N(μ, σ²), σ² = ln(1 + s²), μ = ln m − σ²/2.
    let logs: Vec<f64> = tex.pyramids().iter().map(|p| p.height_um.ln()).collect();
    let (m, v) = sample_mean_var(&logs);
    let var = (1.0f64 + 0.16).ln();
    let mu = 3f64.ln() - 0.5 * var;
    assert!(
        (m - mu).abs() < 4.0 * (var / n).sqrt(),
        "mean ln H {m} vs {mu}"
    );
    assert!(
        (v - var).abs() < 4.0 * var * (2.0 / (n - 1.0)).sqrt(),
        "var ln H {v} vs {var}"
    );
    // Facet angles: normal truncated at ±3σ; variance factor 1 − 2·3·φ(3)/(2Φ(3) − 1).
    let tilts = tex.facet_tilts();
    let (ma, va) = sample_mean_var(&tilts);
    let phi3 = (-4.5f64).exp() / (2.0 * std::f64::consts::PI).sqrt();
    let mass = 0.997_300_203_936_739_8; // 2Φ(3) − 1
    let var_t = 4.0 * (1.0 - 6.0 * phi3 / mass);
    assert!(
        (ma - 54.7356).abs() < 4.0 * (var_t / n).sqrt(),
        "mean angle {ma}"
    );
    assert!(
        (va - var_t).abs() < 4.0 * var_t * (2.0 / (n - 1.0)).sqrt(),
        "angle variance {va} vs {var_t}"
    );
    assert!(
        tilts.iter().all(|&a| (a - 54.7356).abs() <= 6.0 + 1e-9),
        "truncated at ±3σ"
    );
    // Histogram of the realised angles in 1° bins against the truncated normal (4σ per bin).
    let edges: Vec<f64> = (0..=12).map(|k| 48.7356 + k as f64).collect();
    for w in edges.windows(2) {
        let count = tilts.iter().filter(|&&a| w[0] <= a && a < w[1]).count() as f64;
        let cdf = |x: f64| 0.5 * (1.0 + erf((x - 54.7356) / (2.0 * 2f64.sqrt())));
        let p = (cdf(w[1]) - cdf(w[0])) / mass;
        let sd = (n * p * (1.0 - p)).sqrt();
        assert!(
            (count - n * p).abs() < 4.0 * sd + 1.0,
            "bin [{}, {}): {count} vs {}",
            w[0],
            w[1],
            n * p
        );
    }
}

/// Error function, Abramowitz & Stegun 7.1.26 (|error| < 1.5e-7).
fn erf(x: f64) -> f64 {
    let t = 1.0 / (1.0 + 0.327_591_1 * x.abs());
    let y = 1.0
        - (((((1.061_405_429 * t - 1.453_152_027) * t) + 1.421_413_741) * t - 0.284_496_736) * t
            + 0.254_829_592)
            * t
            * (-x * x).exp();
    y.copysign(x)
}

#[test]
fn random_tile_coverage_matches_vertical_probes_and_the_boolean_model() {
    // Exact union area against vertical rays that land on the base plane.
    let tex = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(1.0, 0.3, 3)).unwrap();
    let l = tex.tile_um();
    let mut s = Stream::new(9, 1, 0);
    let n = 200_000;
    let mut flat = 0usize;
    for _ in 0..n {
        let o = Vec3::new(l * s.uniform(), l * s.uniform(), 10.0);
        let h = tex
            .intersect(o, Vec3::NEG_Z, None)
            .expect("vertical rays always land");
        if h.facet == FacetId(0) {
            assert_eq!(h.point.z, 0.0);
            flat += 1;
        }
    }
    let vacancy = 1.0 - tex.coverage();
    let p = flat as f64 / n as f64;
    let sd = (vacancy * (1.0 - vacancy) / n as f64).sqrt();
    assert!(
        (p - vacancy).abs() < 4.0 * sd,
        "flat fraction {p} vs exact {vacancy}"
    );

    // Boolean model: over seeds, mean vacancy vs Πᵢ(1 − bᵢ²/L²) within 4 standard errors.
    let (mut got, mut expected) = (Vec::new(), Vec::new());
    for seed in 0..16 {
        let spec = RandomPyramidsSpec {
            pyramid_count: 200,
            coverage_target: 0.9,
            ..RandomPyramidsSpec::log_normal_height(1.0, 0.3, seed)
        };
        let t = RandomPyramids::new(spec).unwrap();
        let l2 = t.tile_um() * t.tile_um();
        got.push(1.0 - t.coverage());
        expected.push(
            t.pyramids()
                .iter()
                .map(|p| 1.0 - p.base_um * p.base_um / l2)
                .product::<f64>(),
        );
    }
    let (mg, vg) = sample_mean_var(&got);
    let me = expected.iter().sum::<f64>() / expected.len() as f64;
    let se = (vg / got.len() as f64).sqrt();
    assert!(
        (mg - me).abs() < 4.0 * se,
        "mean vacancy {mg} vs Boolean model {me} (se {se})"
    );
    assert!(
        (me - 0.1).abs() < 0.01,
        "tile side chosen for 90 % coverage: {me}"
    );
}

#[test]
fn random_tile_with_one_facet_angle_shows_only_that_tilt_or_flat() {
    let tex = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(5.0, 0.3, 11)).unwrap();
    let alpha = alpha_111_deg().to_radians();
    let l = tex.tile_um();
    let mut s = Stream::new(4, 4, 4);
    for _ in 0..50_000 {
        let o = Vec3::new(l * s.uniform(), l * s.uniform(), 30.0);
        let h = tex.intersect(o, Vec3::NEG_Z, None).unwrap();
        let c = h.normal.z;
        assert!(
            c == 1.0 || (c - alpha.cos()).abs() < 1e-12,
            "normal {:?}",
            h.normal
        );
        let (z, _) = tex.surface_at(o.x, o.y);
        assert!((h.point.z - z).abs() < 1e-12);
    }
    let (bins, flat) = tex.visible_tilt_histogram(&[0.0, 54.0, 55.0, 90.0], 400);
    assert!(
        (flat - (1.0 - tex.coverage())).abs() < 2e-3,
        "flat {flat} vs {}",
        1.0 - tex.coverage()
    );
    assert!((bins[1] + flat - 1.0).abs() < 1e-12 && bins[0] == 0.0 && bins[2] == 0.0);
}

#[test]
fn random_tile_is_reproducible_from_its_seed() {
    let a = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(1.0, 0.3, 42)).unwrap();
    let b = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(1.0, 0.3, 42)).unwrap();
    let c = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(1.0, 0.3, 43)).unwrap();
    assert_eq!(a.pyramids(), b.pyramids());
    assert_ne!(a.pyramids(), c.pyramids());
}

#[test]
fn uniform_base_sizes_stay_in_range() {
    let spec = RandomPyramidsSpec {
        size: SizeDistribution::Uniform {
            min_um: 2.0,
            max_um: 4.0,
        },
        size_of: SizeOf::Base,
        ..RandomPyramidsSpec::log_normal_height(1.0, 0.0, 5)
    };
    let tex = RandomPyramids::new(spec).unwrap();
    let bases: Vec<f64> = tex.pyramids().iter().map(|p| p.base_um).collect();
    assert!(bases.iter().all(|&b| (2.0..=4.0).contains(&b)));
    let (m, _) = sample_mean_var(&bases);
    // Uniform on [2, 4]: mean 3, σ = 2/√12.
    assert!((m - 3.0).abs() < 4.0 * (2.0 / 12f64.sqrt()) / (bases.len() as f64).sqrt());
}

// ---- Height map: generator of the committed PNG, and round trip ----

/// Smooth periodic random bump field, 64 × 64, 16-bit: a sum of 24 Gaussian bumps of random
/// sign, centre and width (1.5–6 px), with minimum-image distances so the tile is seamless,
/// scaled to the full grey range. Seeded by `Stream::new(64, 64, 0)`.
fn bump_levels() -> Vec<u16> {
    let n = 64usize;
    let mut s = Stream::new(64, 64, 0);
    let bumps: Vec<(f64, f64, f64, f64)> = (0..24)
        .map(|_| {
            let (cx, cy) = (n as f64 * s.uniform(), n as f64 * s.uniform());
            let w = 1.5 + 4.5 * s.uniform();
            let a = if s.uniform() < 0.5 { -1.0 } else { 1.0 } * (0.5 + s.uniform());
            (cx, cy, w, a)
        })
        .collect();
    let wrap = |d: f64| d - n as f64 * (d / n as f64).round();
    let field: Vec<f64> = (0..n * n)
        .map(|k| {
            let (x, y) = ((k % n) as f64, (k / n) as f64);
            bumps
                .iter()
                .map(|&(cx, cy, w, a)| {
                    a * (-(wrap(x - cx).powi(2) + wrap(y - cy).powi(2)) / (2.0 * w * w)).exp()
                })
                .sum()
        })
        .collect();
    let lo = field.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = field.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    field
        .iter()
        .map(|v| ((v - lo) / (hi - lo) * 65535.0).round() as u16)
        .collect()
}

#[test]
#[ignore = "writes geometries/bumps-64.png; run once to re-mint the committed file"]
fn mint_bump_map() {
    let img =
        image::ImageBuffer::<image::Luma<u16>, Vec<u16>>::from_raw(64, 64, bump_levels()).unwrap();
    img.save(geometries().join("bumps-64.png")).unwrap();
}

#[test]
fn committed_bump_map_is_its_generator_output_and_round_trips() {
    let expected = bump_levels();
    let tex = texture::from_file(geometries().join("height-map-bumps.toml")).unwrap();
    let map = HeightMap::from_image(&geometries().join("bumps-64.png"), 0.25, 2.0).unwrap();
    assert_eq!(map.size_px(), (64, 64));
    for j in 0..64 {
        for i in 0..64 {
            let (v, full) = map.level(i, j);
            assert_eq!(full, 65535);
            let e = expected[j * 64 + i];
            // One grey level of slack for last-ulp differences of exp() between platforms.
            assert!(v.abs_diff(e) <= 1, "pixel ({i}, {j}): {v} vs {e}");
        }
    }
    // Vertical rays at the vertices return grey/65535 × height scale exactly (the file sets
    // pixel_um = 0.25 and height_scale_um = 2).
    assert_eq!(tex.period_um(), [16.0, 16.0]);
    for j in (0..64).step_by(7) {
        for i in (0..64).step_by(5) {
            let o = Vec3::new(i as f64 * 0.25, j as f64 * 0.25, 10.0);
            let h = tex.intersect(o, Vec3::NEG_Z, None).unwrap();
            let z = map.level(i, j).0 as f64 / 65535.0 * 2.0;
            assert!(
                (h.point.z - z).abs() < 1e-12,
                "vertex ({i}, {j}): {} vs {z}",
                h.point.z
            );
        }
    }
}

// ---- Files and errors ----

#[test]
fn every_committed_geometry_file_loads() {
    let mut n = 0;
    for e in std::fs::read_dir(geometries()).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_some_and(|x| x == "toml") {
            let t = texture::from_file(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
            assert!(!t.describe().is_empty());
            let [lo, hi] = t.z_range_um();
            assert!(lo <= hi);
            n += 1;
        }
    }
    assert!(n >= 8, "{n} files");
    let r3 = texture::from_file(geometries().join("random-pyramids-3um.toml")).unwrap();
    assert!(r3.describe().contains("mean 3 µm"), "{}", r3.describe());
    let lam = texture::from_file(geometries().join("ideal-lambertian.toml")).unwrap();
    assert_eq!(lam.kind(), SurfaceKind::IdealLambertian);
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

#[test]
fn misspelt_keys_are_reported_with_line_column_and_suggestion() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "bad.toml",
        "kind = \"random-pyramids\"\nseed = 3\nmean_hieght_um = 3.0\nbase_angle_deg = 95\n  colour = 1\n",
    );
    let e = texture::from_file(&p).unwrap_err();
    let msg = e.to_string();
    let TextureError::Invalid { problems, .. } = &e else {
        panic!("{msg}")
    };
    assert!(
        msg.contains("bad.toml:3:1: unknown key `mean_hieght_um`"),
        "{msg}"
    );
    assert!(msg.contains("did you mean `mean_height_um`?"), "{msg}");
    assert!(
        msg.contains("bad.toml:4:18: `base_angle_deg` = 95° is out of range"),
        "{msg}"
    );
    assert!(msg.contains("bad.toml:5:3: unknown key `colour`"), "{msg}");
    assert!(msg.contains("missing key `mean_height_um`"), "{msg}");
    let lines: Vec<usize> = problems.iter().map(|p| p.line).collect();
    assert!(
        lines.windows(2).all(|w| w[0] <= w[1]),
        "sorted by line: {lines:?}"
    );
}

#[test]
fn range_and_kind_errors_point_at_the_value() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "p.toml",
        "kind = \"regular-pyramids\"\nbase_um = 10\nperiod_um = 8\n",
    );
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("p.toml:3:13: `period_um` = 8 µm is smaller than `base_um` = 10 µm"),
        "{msg}"
    );
    let p = write(dir.path(), "k.toml", "kind = \"regular-pyramid\"\n");
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("k.toml:1:8") && msg.contains("did you mean \"regular-pyramids\""),
        "{msg}"
    );
    let p = write(dir.path(), "s.toml", "kind = \"v-grooves\"\nperiod_um = \n");
    let e = texture::from_file(&p).unwrap_err();
    assert!(matches!(e, TextureError::Syntax { line: 2, .. }), "{e}");
    let p = write(
        dir.path(),
        "z.toml",
        "kind = \"v-grooves\"\nperiod_um = -2\nangle_deg = \"45\"\n",
    );
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("z.toml:2:13: `period_um` = -2 µm is not a positive length"),
        "{msg}"
    );
    assert!(
        msg.contains("z.toml:3:13: `angle_deg` is a string"),
        "{msg}"
    );
    let e = texture::from_file(dir.path().join("missing.toml")).unwrap_err();
    assert!(matches!(e, TextureError::Read { .. }) && e.to_string().contains("missing.toml"));
}

#[test]
fn tables_without_source_text_still_name_the_key() {
    let mut t = toml::Table::new();
    t.insert("kind".into(), "v-grooves".into());
    t.insert("period".into(), 5.0.into());
    let msg = texture::from_table(&t, Path::new("scenario.toml"))
        .unwrap_err()
        .to_string();
    assert!(
        msg.contains("scenario.toml: unknown key `period`")
            && msg.contains("did you mean `period_um`?"),
        "{msg}"
    );
    t.remove("period");
    t.insert("period_um".into(), 5.0.into());
    assert!(texture::from_table(&t, Path::new("scenario.toml")).is_ok());
}

#[test]
fn bad_height_map_images_are_rejected_with_reasons() {
    let dir = tempfile::tempdir().unwrap();
    let rgb = image::RgbImage::from_pixel(8, 8, image::Rgb([10, 20, 30]));
    rgb.save(dir.path().join("rgb.png")).unwrap();
    let big = image::GrayImage::from_pixel(4097, 2, image::Luma([7]));
    big.save(dir.path().join("big.png")).unwrap();
    std::fs::write(dir.path().join("junk.png"), b"not an image").unwrap();
    let toml_for = |img: &str| {
        format!("kind = \"height-map\"\nimage = \"{img}\"\npixel_um = 0.5\nheight_scale_um = 1\n")
    };
    let p = write(dir.path(), "a.toml", &toml_for("rgb.png"));
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("a.toml:2:9")
            && msg.contains("not single-channel grayscale")
            && msg.contains("Rgb8"),
        "{msg}"
    );
    let p = write(dir.path(), "b.toml", &toml_for("big.png"));
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("4097 × 2 pixels") && msg.contains("4096"),
        "{msg}"
    );
    let p = write(dir.path(), "c.toml", &toml_for("junk.png"));
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("c.toml:2:9") && msg.contains("junk.png"),
        "{msg}"
    );
    let p = write(dir.path(), "d.toml", &toml_for("nowhere.png"));
    let msg = texture::from_file(&p).unwrap_err().to_string();
    assert!(
        msg.contains("cannot be read") && msg.contains("nowhere.png"),
        "{msg}"
    );
    // An 8-bit grey image is accepted: grey 255 is the full height scale.
    let g = image::GrayImage::from_fn(4, 4, |i, j| {
        image::Luma([if (i + j) % 2 == 0 { 255 } else { 0 }])
    });
    g.save(dir.path().join("g.png")).unwrap();
    let m = HeightMap::from_image(&dir.path().join("g.png"), 1.0, 2.0).unwrap();
    assert_eq!(m.z_range_um(), [0.0, 2.0]);
}
