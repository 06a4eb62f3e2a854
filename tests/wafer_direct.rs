//! The direct wafer tracer against the incoherent slab formula for a planar wafer (multiple
//! reflections summed as a geometric series; e.g. M. Born & E. Wolf, *Principles of Optics*,
//! 7th ed., 1999, §1.6.5 for the intensity sums, or any optics text), within 4σ of its own
//! standard error, and the energy accounting to round-off.

use lightfold::texture::Planar;
use lightfold::tracer::{
    BareInterface, Incidence, InputPolarisation, PolarisationMode, Surface, ThickLayer, WaferModel,
};

#[test]
fn planar_wafer_matches_incoherent_slab_formula() {
    let (n, w_um, alpha) = (3.6, 100.0, 0.01); // α = 100 cm⁻¹: αW = 1
    let front = BareInterface {
        n_above: 1.0,
        n_below: n,
    };
    let rear = BareInterface {
        n_above: n,
        n_below: 1.0,
    };
    let tex = Planar::new();
    let surf = |resp: &'static BareInterface, a: f64, b: f64| Surface {
        texture: &tex,
        response: resp,
        n_above: a,
        n_below: b,
        polarisation: PolarisationMode::Stokes,
    };
    let front: &'static BareInterface = Box::leak(Box::new(front));
    let rear: &'static BareInterface = Box::leak(Box::new(rear));
    let model = WaferModel {
        interfaces: vec![surf(front, 1.0, n), surf(rear, n, 1.0)],
        layers: vec![ThickLayer {
            thickness_um: w_um,
            alpha_per_um: alpha,
        }],
        absorber: 0,
        profile_bins: 50,
    };
    model.validate().unwrap();
    let inc = Incidence::Above {
        theta: 0.0,
        phi: 0.0,
        polarisation: InputPolarisation::Unpolarised,
    };
    let t = model.trace(&inc, 200_000, 11, 0);
    let r = ((n - 1.0) / (n + 1.0)).powi(2);
    let e = (-alpha * w_um).exp();
    let den = 1.0 - r * r * e * e;
    let r_tot = r + (1.0 - r).powi(2) * r * e * e / den;
    let t_tot = (1.0 - r).powi(2) * e / den;
    let a_tot = (1.0 - r) * (1.0 - e) * (1.0 + r * e) / den;
    let check = |est: lightfold::tracer::Estimate, x: f64, what: &str| {
        assert!(
            (est.value - x).abs() < 4.0 * est.std_error + 1e-12,
            "{what}: {est:?} vs {x}"
        );
    };
    check(t.estimate(&t.reflected), r_tot, "R");
    check(t.estimate(&t.transmitted), t_tot, "T");
    check(t.estimate(&t.layers[0]), a_tot, "A");
    // Escape: the part of R that entered the wafer.
    check(t.estimate(&t.escape), r_tot - r, "escape");
    assert!(t.energy_error() < 1e-12);
    assert_eq!(t.lost_rays, 0);
    // The generation profile integrates to the absorbed power, and falls off as e^{−αz}
    // for the first pass (ratio of first to last bin over 100 µm ≈ e^{−1·0.98} ... with the
    // back-reflected pass adding to the deep end).
    let total: f64 = t.profile.iter().sum::<f64>() / t.rays as f64;
    assert!((total - t.estimate(&t.layers[0]).value).abs() < 1e-12);
    let edges = model.profile_edges_um();
    assert!((edges[0]).abs() < 1e-12 && (edges[50] - w_um).abs() < 1e-12);
    // Expected first/last bin ratio from the two passes (forward e^{−αz}, back r·e^{−α(2W−z)}):
    let g = |z: f64| (-alpha * z).exp() + r * (-alpha * (2.0 * w_um - z)).exp();
    let ratio = t.profile[0] / t.profile[49];
    let expected = g(1.0) / g(99.0);
    assert!(
        (ratio / expected - 1.0).abs() < 0.05,
        "profile ratio {ratio} vs {expected}"
    );
}
