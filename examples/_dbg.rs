use lightfold::texture::random::RandomPyramidsSpec;
use lightfold::texture::{RandomPyramids, Flipped, Texture, RegularPyramids};
use lightfold::texture::pyramids::RegularPyramidsSpec;
use lightfold::tracer::*;
use std::sync::Arc;
fn main() {
    let rp: Arc<dyn Texture> = Arc::new(RandomPyramids::new(RandomPyramidsSpec::log_normal_height(3.0, 0.35, 3)).unwrap());
    let fl = Flipped(rp.clone());
    let reg: Arc<dyn Texture> = Arc::new(RegularPyramids::new(RegularPyramidsSpec::upright(5.0)).unwrap());
    let bare = BareInterface { n_above: 1.0, n_below: 3.6 };
    let bare_r = BareInterface { n_above: 3.6, n_below: 1.0 };
    for (name, tex, resp, n_a, n_b, inc) in [
        ("random from below iso", &*rp, &bare, 1.0, 3.6, Incidence::BelowIsotropic),
        ("random from above", &*rp, &bare, 1.0, 3.6, Incidence::Above{theta:0.0,phi:0.0,polarisation:InputPolarisation::Unpolarised}),
        ("random from above 60", &*rp, &bare, 1.0, 3.6, Incidence::Above{theta:1.0,phi:0.3,polarisation:InputPolarisation::Unpolarised}),
        ("regular from below iso", &*reg, &bare, 1.0, 3.6, Incidence::BelowIsotropic),
        ("flipped from below iso (air side)", &fl as &dyn Texture, &bare_r, 3.6, 1.0, Incidence::BelowIsotropic),
    ] {
        let s = Surface { texture: tex, response: resp, n_above: n_a, n_below: n_b, polarisation: PolarisationMode::Stokes };
        let (t, ()) = s.trace::<()>(&inc, 200_000, 1, 0);
        println!("{name}: lost {} limited {} R {:.4}", t.lost_rays, t.event_limited_rays, t.reflectance().value);
    }
    // flipped from above (Si side) with isotropic: emulate with many directions
    let s = Surface { texture: &fl, response: &bare_r, n_above: 3.6, n_below: 1.0, polarisation: PolarisationMode::Stokes };
    let mut lost = 0; let mut tot = 0;
    for k in 0..40 { let th = (k as f64 + 0.5) / 40.0 * 1.5; 
        let (t, ()) = s.trace::<()>(&Incidence::Above{theta: th, phi: 0.7, polarisation: InputPolarisation::Unpolarised}, 5000, 1, k);
        lost += t.lost_rays; tot += t.rays; }
    println!("flipped from Si side: lost {lost} / {tot}");
}
