//! The `lightfold materials` command as a user runs it: listing, showing a material at
//! chosen wavelengths (values from M. A. Green, Sol. Energy Mater. Sol. Cells 92, 1305
//! (2008), Table 1), JSON output, and bad input → a clear message on stderr and exit code 1.

use std::process::{Command, Output};

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lightfold"))
        .arg("materials")
        .args(args)
        .output()
        .expect("the binary runs")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn listing_shows_every_library_entry() {
    let o = run(&[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = stdout(&o);
    for id in lightfold::optics::materials::library()
        .iter()
        .map(|m| m.id())
    {
        assert!(
            text.lines().any(|l| l.starts_with(&format!("{id} "))),
            "{id} missing:\n{text}"
        );
    }
    assert!(text.contains("si → si-green2008"));
    assert!(text.contains("250–1450"), "range of si-green2008 shown");
}

#[test]
fn listing_as_json() {
    let o = run(&["--json"]);
    assert_eq!(o.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    let list = v["materials"].as_array().unwrap();
    let si = list.iter().find(|m| m["id"] == "si-green2008").unwrap();
    assert_eq!(si["range_nm"], serde_json::json!([250.0, 1450.0]));
    assert_eq!(si["absorbing"], true);
    assert!(
        list.iter()
            .any(|m| m["id"] == "air" && m["range_nm"].is_null())
    );
    assert_eq!(v["aliases"]["si"], "si-green2008");
}

#[test]
fn shows_n_k_alpha_at_listed_wavelengths() {
    // Green (2008) Table 1: at 800 nm n = 3.675, k = 5.4113e-3, α = 8.50e2 cm⁻¹.
    let o = run(&["si", "--wavelengths", "500,800,1000"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = stdout(&o);
    assert!(text.starts_with("si-green2008: crystalline Si"), "{text}");
    let row = text
        .lines()
        .find(|l| l.trim_start().starts_with("800 "))
        .expect("800 nm row");
    let cols: Vec<f64> = row.split_whitespace().map(|c| c.parse().unwrap()).collect();
    assert_eq!(cols.len(), 4);
    assert!((cols[1] - 3.675).abs() < 1e-5 && (cols[2] - 5.4113e-3).abs() < 1e-7);
    assert!((cols[3] / 850.0 - 1.0).abs() < 0.01, "α = {}", cols[3]);
}

#[test]
fn range_syntax_and_json_points() {
    let o = run(&["si-green2008", "--wavelengths", "300:1200:100", "--json"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    let pts = v["points"].as_array().unwrap();
    assert_eq!(pts.len(), 10);
    assert_eq!(pts[9]["wavelength_nm"], 1200.0);
    let k = pts[5]["k"].as_f64().unwrap(); // 800 nm
    let alpha = pts[5]["alpha_per_cm"].as_f64().unwrap();
    assert!((alpha - 4.0 * std::f64::consts::PI * k / 800e-7).abs() < 1e-9 * alpha);
    assert!(v["source"].as_str().unwrap().contains("Green"));
}

#[test]
fn literal_index_and_default_grid() {
    let o = run(&["2.05+0.001i"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stdout(&o)
            .lines()
            .filter(|l| l.trim_start().starts_with(char::is_numeric))
            .count()
            >= 2
    );
}

#[test]
fn out_of_range_wavelength_is_bad_input() {
    let o = run(&["si", "--wavelengths", "1500"]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(
        err.starts_with("error: material `si-green2008` has no data at 1500 nm"),
        "{err}"
    );
    assert!(err.contains("250–1450 nm") && err.contains("fix:"), "{err}");
    assert!(stdout(&o).is_empty(), "no partial table on failure");
}

#[test]
fn unknown_material_suggests_ids() {
    let o = run(&["si-gren2008"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        stderr(&o).contains("did you mean `si-green2008`"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn malformed_wavelengths_and_literals_are_bad_input() {
    for args in [
        &["si", "--wavelengths", "abc"][..],
        &["si", "--wavelengths", "800:400:10"],
        &["si", "--wavelengths", "400:800"],
        &["--wavelengths", "400"],
        &["2.05-0.01i"],
        &["./missing-file.csv"],
    ] {
        let o = run(args);
        assert_eq!(o.status.code(), Some(1), "{args:?}: {}", stderr(&o));
        let err = stderr(&o);
        assert!(
            err.starts_with("error: ") && err.len() > 30,
            "{args:?}: {err}"
        );
    }
}
