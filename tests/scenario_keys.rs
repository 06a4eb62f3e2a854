//! Numeric key paths for sweeps (`set_number`): every documented key form edits the right
//! number, keeps the rest of the file (comments included), adds keys left at their default,
//! copies a referenced texture inline so each sweep point is self-contained, and rejects keys
//! that do not exist with the nearest valid ones. The checks compare against the values
//! written into the text, nothing else.

use lightfold::scenario::{
    DEMO_TOML, Element, RayBudget, Scenario, ScenarioError, numeric_keys, set_number,
};
use lightfold::tracer::InputPolarisation;
use std::path::Path;

fn set(text: &str, key: &str, value: f64) -> Scenario {
    let t = set_number(text, None, key, value).unwrap_or_else(|e| panic!("{key}: {e}"));
    Scenario::from_str(&t, Path::new("<test>")).unwrap_or_else(|e| panic!("{key}:\n{e}\n{t}"))
}

const MINIMAL: &str = r#"# a comment that must survive
[[stack]]
kind = "interface"
texture = { kind = "regular-pyramids", base_um = 10 }
coating = [{ material = "sinx-n2.09-vogt2015", thickness_nm = 75 }]

[[stack]]
kind = "layer"
material = "si"
thickness_um = 150   # wafer

[[stack]]
kind = "interface"
texture = "planar"
"#;

fn minimal() -> String {
    MINIMAL.to_string()
}

#[test]
fn values_written_in_the_file_are_replaced_in_place() {
    let text = minimal();
    let t = set_number(&text, None, "stack.layer-1.thickness_um", 120.0).unwrap();
    assert!(t.contains("thickness_um = 120.0   # wafer"), "{t}");
    assert!(t.starts_with("# a comment that must survive"));
    assert_eq!(t.lines().count(), text.lines().count());
    let s = Scenario::from_str(&t, Path::new("<test>")).unwrap();
    assert_eq!(s.absorber_layer().thickness_um, 120.0);
    let s = set(&text, "stack.front.coating.0.thickness_nm", 82.5);
    let Element::Interface(front) = &s.stack[0] else {
        panic!()
    };
    assert_eq!(front.coating[0].thickness_nm, 82.5);
    // By position instead of name.
    let s = set(&text, "stack.1.thickness_um", 99.0);
    assert_eq!(s.absorber_layer().thickness_um, 99.0);
}

#[test]
fn keys_left_at_their_default_are_added() {
    let text = minimal();
    let s = set(&text, "light.polar_angle_deg", 30.0);
    assert_eq!(s.light.polar_angle_deg, 30.0);
    let s = set(&text, "solver.rays", 5000.0);
    assert_eq!(s.solver.rays, RayBudget::Fixed(5000));
    let s = set(&text, "light.weighting_band_nm.0", 400.0);
    assert_eq!(s.light.weighting_band_nm, (400.0, 1200.0));
    let s = set(&text, "light.polarisation.linear_deg", 45.0);
    assert_eq!(
        s.light.polarisation,
        InputPolarisation::Linear(45f64.to_radians())
    );
    // Into an existing section with a header, and into an inline texture table.
    let with_light = format!("[light]\nspectrum = \"am1.5g\"\n\n{text}");
    let s = set(&with_light, "light.azimuth_deg", 45.0);
    assert_eq!(s.light.azimuth_deg, 45.0);
    let s = set(&text, "stack.front.texture.period_um", 12.0);
    let Element::Interface(front) = &s.stack[0] else {
        panic!()
    };
    assert_eq!(front.texture.period_um(), [12.0, 12.0]);
    // Into a [stack.texture] sub-table: the new key lands inside it.
    let sub = text.replace(
        "texture = \"planar\"",
        "[stack.texture]\nkind = \"regular-pyramids\"\nbase_um = 4",
    );
    let s = set(&sub, "stack.rear.texture.period_um", 5.0);
    assert_eq!(
        s.interfaces().last().unwrap().texture.period_um(),
        [5.0, 5.0]
    );
}

#[test]
fn a_referenced_texture_is_copied_inline_with_the_new_value() {
    let t = set_number(DEMO_TOML, None, "stack.front.texture.mean_height_um", 2.0).unwrap();
    assert!(t.contains("texture = { "), "{t}");
    assert!(t.contains("mean_height_um = 2.0"), "{t}");
    assert!(
        t.contains("seed = 3"),
        "the file's other keys are kept: {t}"
    );
    let s = Scenario::from_str(&t, Path::new("<test>")).unwrap();
    let faces: Vec<_> = s.interfaces().collect();
    assert!(faces[0].texture.describe().contains("mean 2 µm"));
    assert!(
        faces[1].texture.describe().contains("mean 3 µm"),
        "rear unchanged"
    );
    // Whole numbers stay whole.
    let t = set_number(DEMO_TOML, None, "stack.rear.texture.pyramid_count", 300.0).unwrap();
    assert!(
        t.contains("pyramid_count = 300,") || t.contains("pyramid_count = 300 "),
        "{t}"
    );
}

#[test]
fn scenario_with_number_revalidates() {
    let demo = Scenario::demo();
    let s = demo.with_number("stack.wafer.thickness_um", 100.0).unwrap();
    assert_eq!(s.absorber_layer().thickness_um, 100.0);
    let e = demo
        .with_number("stack.wafer.thickness_um", -1.0)
        .unwrap_err();
    assert!(matches!(e, ScenarioError::Invalid { .. }), "{e}");
    assert!(e.to_string().contains("thickness_um"));
}

#[test]
fn unknown_keys_list_the_nearest_valid_ones() {
    let e = set_number(DEMO_TOML, None, "stack.wafer.thicknes_um", 1.0).unwrap_err();
    let ScenarioError::Key {
        problem,
        expected,
        fix,
        ..
    } = &e
    else {
        panic!("{e}")
    };
    assert!(problem.contains("names no number"));
    assert!(
        expected.contains("`stack.wafer.thickness_um`"),
        "{expected}"
    );
    assert_eq!(fix, "did you mean `stack.wafer.thickness_um`?");
    let e = set_number(DEMO_TOML, None, "stack.bulk.thickness_um", 1.0).unwrap_err();
    assert!(e.to_string().contains("stack.wafer.thickness_um"), "{e}");
    // A film that does not exist, a non-numeric key, a fractional count.
    assert!(set_number(DEMO_TOML, None, "stack.front.coating.1.thickness_nm", 1.0).is_err());
    assert!(set_number(DEMO_TOML, None, "light.spectrum", 1.0).is_err());
    let e = set_number(DEMO_TOML, None, "solver.rays", 10.5).unwrap_err();
    assert!(e.to_string().contains("not a whole number"), "{e}");
    assert!(set_number(DEMO_TOML, None, "light.polar_angle_deg", f64::NAN).is_err());
}

#[test]
fn numeric_keys_of_the_demo() {
    let keys = numeric_keys(DEMO_TOML, None).unwrap();
    for k in [
        "light.polar_angle_deg",
        "stack.front.coating.0.thickness_nm",
        "stack.front.texture.mean_height_um",
        "stack.wafer.thickness_um",
        "stack.rear.coating.0.thickness_nm",
        "solver.rays",
    ] {
        assert!(keys.iter().any(|x| x == k), "{k} missing from {keys:?}");
    }
    // Base-size keys do not apply to a height-based log-normal texture.
    assert!(!keys.iter().any(|k| k.ends_with("mean_base_um")));
    // Every listed key can be set (to a value valid for it) and parses back as TOML.
    for k in &keys {
        let t = set_number(DEMO_TOML, None, k, 1.0).unwrap_or_else(|e| panic!("{k}: {e}"));
        toml::from_str::<toml::Table>(&t).unwrap_or_else(|e| panic!("{k}: {e}\n{t}"));
    }
}
