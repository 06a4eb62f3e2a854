//! The scenario reader keeps a position for every key and value, whatever TOML form the user
//! chose (dotted keys, inline tables, sub-table headers, arrays of tables), so messages can
//! point at them. Reference: the TOML 1.0.0 specification (toml.io/en/v1.0.0) for the forms.

use lightfold::scenario::{RawScenario, RawValue, Scenario};
use std::path::Path;

fn parse(text: &str) -> RawScenario {
    RawScenario::parse(text, Path::new("t.toml"), None).unwrap()
}

fn problems(text: &str) -> Vec<(usize, usize, String)> {
    let e = Scenario::from_str(text, Path::new("t.toml")).unwrap_err();
    e.problems()
        .iter()
        .map(|p| (p.line, p.col, p.problem.clone()))
        .collect()
}

#[test]
fn every_key_and_value_has_its_span() {
    let text = "name = \"x\"\nlight.polar_angle_deg = 5\n[solver]\nrays = 7\n";
    let raw = parse(text);
    let light = raw.root.iter().find(|e| e.key == "light").unwrap();
    let RawValue::Table(t) = &light.node.value else {
        panic!()
    };
    let polar = &t[0];
    assert_eq!(&text[polar.key_span.clone()], "polar_angle_deg");
    assert_eq!(&text[polar.node.span.clone()], "5");
    let solver = raw.root.iter().find(|e| e.key == "solver").unwrap();
    assert!(text[solver.node.span.clone()].starts_with("[solver]"));
}

#[test]
fn dotted_keys_inline_tables_and_sub_tables_are_located() {
    // A misspelt key in each form: dotted, inline table, sub-table header.
    let text = "light.polar_angel_deg = 5\n\
                [[stack]]\nkind = \"interface\"\ntexture = { kind = \"planar\", colour = 1 }\n\
                [[stack]]\nkind = \"layer\"\nmaterial = \"si\"\nthickness_um = 100\n\
                [[stack]]\nkind = \"interface\"\n[stack.texture]\nkind = \"regular-pyramids\"\nbase_um = 10\nbase_angel_deg = 50\n";
    let ps = problems(text);
    let find = |what: &str| {
        ps.iter()
            .find(|p| p.2.contains(what))
            .unwrap_or_else(|| panic!("{what} in {ps:#?}"))
            .clone()
    };
    assert_eq!(
        (find("polar_angel_deg").0, find("polar_angel_deg").1),
        (1, 7)
    );
    assert_eq!((find("colour").0, find("colour").1), (4, 30));
    assert_eq!(
        (find("base_angel_deg").0, find("base_angel_deg").1),
        (14, 1)
    );
}

#[test]
fn values_of_unexpected_types_are_reported_not_fatal() {
    // A date, an array where a string belongs, a table where a number belongs.
    let text = "name = 2024-05-01\n[light]\nspectrum = [\"am1.5g\"]\npolar_angle_deg = { deg = 5 }\n\
                [[stack]]\nkind = \"interface\"\ntexture = \"planar\"\n";
    let ps = problems(text);
    assert!(
        ps.iter().any(|p| p.0 == 1 && p.2.contains("is a datetime")),
        "{ps:#?}"
    );
    assert!(
        ps.iter().any(|p| p.0 == 3 && p.2.contains("is a array")),
        "{ps:#?}"
    );
    assert!(
        ps.iter().any(|p| p.0 == 4 && p.2.contains("is a table")),
        "{ps:#?}"
    );
}

#[test]
fn columns_count_characters_not_bytes() {
    // "µ" and "—" are multi-byte in UTF-8; the column after them counts characters.
    let text = "description = \"160 µm — test\"\ncolor = 1\n[[stack]]\nkind = \"interface\"\n\
                texture = \"planar\" # µµ\ncolour = 2\n";
    let ps = problems(text);
    assert!(ps.iter().any(|p| (p.0, p.1) == (2, 1)), "{ps:#?}");
    assert!(ps.iter().any(|p| (p.0, p.1) == (6, 1)), "{ps:#?}");
}

/// A directional coating is tabulated at the texture's own facet tilts: 54.7356° {111}
/// facets of upright pyramids round to the 0.25° level 54.75° (cos = 0.57714, `texture::
/// coating_tilt_levels`); a conformal one at the untilted thickness only.
#[test]
fn interfaces_carry_the_facet_tilts_their_coating_is_tabulated_at() {
    let text = |geometry: &str| {
        format!(
            "[[stack]]\nkind = \"interface\"\nname = \"front\"\ntexture = \"upright-pyramids-10um\"\n\
             coating = [{{ material = \"sinx-n2.09-vogt2015\", thickness_nm = 75 }}]\n\
             coating_geometry = \"{geometry}\"\n\
             [[stack]]\nkind = \"layer\"\nname = \"wafer\"\nmaterial = \"si\"\nthickness_um = 100\n\
             [[stack]]\nkind = \"interface\"\nname = \"rear\"\ntexture = \"planar\"\n"
        )
    };
    let front = |geometry: &str| {
        let s = Scenario::from_str(
            &text(geometry),
            Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("t.toml")
                .as_path(),
        )
        .unwrap();
        s.interfaces().next().unwrap().coating_tilt_cos.clone()
    };
    let directional = front("directional");
    assert_eq!(directional.len(), 1, "{directional:?}");
    assert!((directional[0] - 54.75f64.to_radians().cos()).abs() < 1e-15);
    assert_eq!(front("conformal"), vec![1.0]);
}
