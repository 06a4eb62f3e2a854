//! The embedded demo and every scenario in `examples/` validate, and their validated form says
//! what the files say. Geometric facts checked against the geometry of {111} facets on (100)
//! silicon (facet angle atan √2 = 54.7356°, so a pyramid of base b is b·√2/2 tall; common
//! practice, no source beyond the cube's geometry).

use lightfold::scenario::{Element, Features, Mode, RayBudget, Scenario, SpectrumSource};
use std::path::{Path, PathBuf};

fn examples() -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut out = Vec::new();
    let mut dirs = vec![root];
    while let Some(d) = dirs.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let p = e.path();
            if p.is_dir() {
                dirs.push(p);
            } else if p.extension().is_some_and(|x| x == "toml") {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

fn load(rel: &str) -> Scenario {
    let p = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join(rel);
    Scenario::from_file(&p).unwrap_or_else(|e| panic!("{}:\n{e}", p.display()))
}

#[test]
fn every_example_validates() {
    let files = examples();
    assert!(files.len() >= 4, "examples found: {files:?}");
    for f in files {
        let s = Scenario::from_file(&f).unwrap_or_else(|e| panic!("{}:\n{e}", f.display()));
        assert_eq!(s.source.as_deref(), Some(f.as_path()));
        assert!(!s.summary().is_empty());
        assert_eq!(s.summary_json()["name"], s.name.as_str());
    }
}

#[test]
fn demo_is_the_documented_pilot_line_wafer() {
    let s = Scenario::demo();
    assert_eq!(s.source, None);
    assert_eq!(s.stack.len(), 3);
    assert_eq!(s.absorber, 0);
    let w = s.absorber_layer();
    assert_eq!(
        (w.name.as_str(), w.material.id(), w.thickness_um),
        ("wafer", "si-green2008", 160.0)
    );
    let faces: Vec<_> = s.interfaces().collect();
    assert_eq!(faces[0].features, Features::Up);
    assert_eq!(
        faces[1].features,
        Features::Down,
        "rear pyramids point out of the wafer"
    );
    assert_eq!(faces[0].coating[0].material.id(), "sinx-n2.09-vogt2015");
    assert_eq!(faces[0].coating[0].thickness_nm, 75.0);
    assert_eq!(faces[1].coating[0].material.id(), "sio2-malitson1965");
    assert_eq!(s.below.material.id(), "ag-mcpeak2015");
    // Front pyramids stand on the base plane (z ≥ 0); the flipped rear ones hang below it.
    assert_eq!(faces[0].texture.z_range_um()[0], 0.0);
    assert_eq!(faces[1].texture.z_range_um()[1], 0.0);
    assert!(faces[1].texture.z_range_um()[0] < -3.0);
    assert_eq!(s.light.wavelengths.len(), 91);
    assert_eq!(s.light.wavelengths.bounds_nm(), (300.0, 1200.0));
    assert_eq!(s.light.spectrum.get().id(), "am1.5g");
    assert_eq!(s.solver.mode, Mode::Direct);
    assert!(
        matches!(s.solver.rays, RayBudget::Fixed(n) if n <= 4096),
        "demo must stay quick"
    );
}

#[test]
fn module_stack_absorber_is_the_wafer_below_glass_and_eva() {
    let s = load("module-stack.toml");
    let layers: Vec<&str> = s.layers().map(|l| l.name.as_str()).collect();
    assert_eq!(layers, ["glass", "eva", "wafer"]);
    assert_eq!(s.absorber, 2);
    assert_eq!(s.layers().next().unwrap().thickness_um, 3200.0);
    assert_eq!(s.interfaces().count(), 4);
    let feats: Vec<Features> = s.interfaces().map(|i| i.features).collect();
    assert_eq!(
        feats,
        [Features::Up, Features::Up, Features::Up, Features::Down]
    );
}

#[test]
fn thin_wafer_pair_differs_only_in_the_front_texture() {
    let a = load("inverted-vs-random-thin-wafer/alkaline-random.toml");
    let b = load("inverted-vs-random-thin-wafer/lithographic-inverted.toml");
    assert_eq!(a.absorber_layer().thickness_um, 100.0);
    assert_eq!(b.absorber_layer().thickness_um, 100.0);
    let fa = a.interfaces().next().unwrap();
    let fb = b.interfaces().next().unwrap();
    assert_ne!(fa.texture_label, fb.texture_label);
    // Inverted pits, 9.5 µm base with {111} facets: 9.5/2·√2 = 6.718 µm deep, into the wafer.
    let depth = -fb.texture.z_range_um()[0];
    assert!(
        (depth - 9.5 / 2.0 * 2f64.sqrt()).abs() < 1e-3,
        "pit depth {depth}"
    );
    assert_eq!(a.light.wavelengths, b.light.wavelengths);
    assert_eq!(a.solver.rays, b.solver.rays);
    let rear = |s: &Scenario| {
        let r = s.interfaces().last().unwrap();
        (r.texture_label.clone(), r.coating[0].thickness_nm)
    };
    assert_eq!(rear(&a), rear(&b));
}

#[test]
fn under_top_cell_reads_the_filtered_spectrum_file() {
    let s = load("under-top-cell.toml");
    let SpectrumSource::File(spec) = &s.light.spectrum else {
        panic!("expected a spectrum file");
    };
    // The generator's transmittance is < 1e-6 at 500 nm and ~0.9 above 800 nm (see
    // examples/spectra/make_top_cell_filtered.py); AM1.5G itself is ~1.5 W m⁻² nm⁻¹ at 500 nm.
    let g = lightfold::spectrum::Spectrum::am15g();
    assert!(spec.irradiance_at(500.0) < 1e-5 * g.irradiance_at(500.0));
    let ratio = spec.irradiance_at(900.0) / g.irradiance_at(900.0);
    assert!(
        (ratio - 0.9 * (1.0 - 0.08 * 100.0 / 700.0)).abs() < 1e-3,
        "T(900) = {ratio}"
    );
    assert_eq!(s.light.weighting_band_nm, (700.0, 1200.0));
    assert!(matches!(&s.stack[0], Element::Interface(_)));
}

#[test]
fn the_minimal_scenario_in_the_docs_validates_with_the_documented_defaults() {
    let doc =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/scenario.md"))
            .unwrap();
    let start = doc
        .find("```toml\n")
        .expect("a TOML block in docs/scenario.md")
        + 8;
    let end = start + doc[start..].find("```").unwrap();
    let origin = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/minimal.toml");
    let s = Scenario::from_str(&doc[start..end], &origin).unwrap_or_else(|e| panic!("{e}"));
    // Defaults stated in the docs.
    assert_eq!(s.light.spectrum.get().id(), "am1.5g");
    assert_eq!(s.light.wavelengths.bounds_nm(), (300.0, 1200.0));
    assert_eq!(s.light.wavelengths.len(), 91);
    assert_eq!(s.light.polar_angle_deg, 0.0);
    assert_eq!(s.above.material.id(), "air");
    assert_eq!(s.solver.rays, RayBudget::Fixed(10_000));
    assert_eq!(s.solver.mode, Mode::Direct);
    let names: Vec<String> = s
        .stack
        .iter()
        .map(|e| match e {
            Element::Interface(i) => i.name.clone(),
            Element::Layer(l) => l.name.clone(),
        })
        .collect();
    assert_eq!(names, ["front", "layer-1", "rear"]);
    assert_eq!(s.absorber_layer().material.id(), "si-green2008");
}
