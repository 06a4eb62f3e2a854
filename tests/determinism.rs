//! One job on 1, 2 and 8 threads gives bitwise-equal tallies (DESIGN §4: seed each work chunk
//! from (master seed, job key, chunk); merge in chunk order). Common practice, no source.

use lightfold::texture::pyramids::RegularPyramidsSpec;
use lightfold::texture::random::RandomPyramidsSpec;
use lightfold::texture::{Planar, RandomPyramids, RegularPyramids};
use lightfold::thinfilm::{FilmStack, Layer};
use lightfold::tracer::{
    BareInterface, CoatedInterface, CoatingGeometry, Incidence, InputPolarisation,
    PolarisationMode, Surface, ThickLayer, WaferModel,
};
use num_complex::Complex64;

fn on_threads<T: Send>(n: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build()
        .unwrap()
        .install(f)
}

#[test]
fn surface_and_wafer_tallies_are_identical_on_1_2_and_8_threads() {
    let tex = RandomPyramids::new(RandomPyramidsSpec::log_normal_height(3.0, 0.35, 5)).unwrap();
    let stack = FilmStack::new(
        Complex64::new(1.0, 0.0),
        vec![Layer::new(Complex64::new(2.05, 0.002), 75.0)],
        Complex64::new(3.7, 0.0),
    )
    .unwrap();
    let coated = CoatedInterface::new(&stack, 800.0, CoatingGeometry::Conformal, &[]).unwrap();
    let surf = Surface {
        texture: &tex,
        response: &coated,
        n_above: 1.0,
        n_below: 3.7,
        polarisation: PolarisationMode::Stokes,
    };
    let inc = Incidence::Above {
        theta: 0.3,
        phi: 0.2,
        polarisation: InputPolarisation::Unpolarised,
    };
    let runs: Vec<_> = [1, 2, 8]
        .into_iter()
        .map(|n| on_threads(n, || surf.trace::<()>(&inc, 50_000, 99, 3).0))
        .collect();
    assert_eq!(runs[0], runs[1]);
    assert_eq!(runs[0], runs[2]);
    // Precision mode too (its rounds are planned from results only).
    let prec: Vec<_> = [1, 2]
        .into_iter()
        .map(|n| {
            on_threads(n, || {
                surf.trace_to_precision::<()>(&inc, 2e-3, 1_000_000, 99, 3)
                    .0
            })
        })
        .collect();
    assert_eq!(prec[0], prec[1]);

    let rear = BareInterface {
        n_above: 3.7,
        n_below: 1.0,
    };
    let planar = Planar::new();
    let model = WaferModel {
        interfaces: vec![
            surf,
            Surface {
                texture: &planar,
                response: &rear,
                n_above: 3.7,
                n_below: 1.0,
                polarisation: PolarisationMode::Stokes,
            },
        ],
        layers: vec![ThickLayer {
            thickness_um: 150.0,
            alpha_per_um: 0.002,
        }],
        absorber: 0,
        profile_bins: 20,
    };
    let wafer: Vec<_> = [1, 2, 8]
        .into_iter()
        .map(|n| on_threads(n, || model.trace(&inc, 20_000, 5, 1)))
        .collect();
    assert_eq!(wafer[0], wafer[1]);
    assert_eq!(wafer[0], wafer[2]);
}

#[test]
fn ray_packet_tallies_are_identical_on_1_2_and_8_threads() {
    // Upright regular pyramids go through the packet tracer (four rays in flight per chunk):
    // its rounds draw random numbers in a fixed order, so chunks still decide the result.
    let tex = RegularPyramids::new(RegularPyramidsSpec::upright(4.0)).unwrap();
    let bare = BareInterface {
        n_above: 1.0,
        n_below: 3.7,
    };
    for mode in [PolarisationMode::Unpolarised, PolarisationMode::Stokes] {
        let surf = Surface {
            texture: &tex,
            response: &bare,
            n_above: 1.0,
            n_below: 3.7,
            polarisation: mode,
        };
        let inc = Incidence::Above {
            theta: 0.2,
            phi: 0.1,
            polarisation: InputPolarisation::Unpolarised,
        };
        let runs: Vec<_> = [1, 2, 8]
            .into_iter()
            .map(|n| on_threads(n, || surf.trace::<()>(&inc, 30_000, 17, 2).0))
            .collect();
        assert_eq!(runs[0], runs[1]);
        assert_eq!(runs[0], runs[2]);
    }
}
