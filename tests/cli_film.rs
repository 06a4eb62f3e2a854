//! `lightfold film`, the coating calculator, run as a user would: the binary in a temporary
//! folder. Physics checks use literal indices and textbook facts (the quarter-wave
//! anti-reflection condition, H. A. Macleod, *Thin-Film Optical Filters*, 4th ed., CRC Press
//! 2010, §4.2; normal-incidence Fresnel reflectance, Born & Wolf 1999 §1.5.2); bad input must
//! give a clear message, exit code 1, no panic and no `--csv` file.

use lightfold::thinfilm::{FilmStack, Layer};
use num_complex::Complex64;
use serde_json::Value;
use std::path::Path;
use std::process::{Command, Output};

fn film(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lightfold"))
        .arg("film")
        .args(args)
        .current_dir(dir)
        .output()
        .expect("run lightfold")
}

fn c(re: f64, im: f64) -> Complex64 {
    Complex64::new(re, im)
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn ok(args: &[&str], dir: &Path) -> Output {
    let o = film(args, dir);
    assert!(o.status.success(), "{args:?} failed: {}", stderr(&o));
    o
}

fn json(args: &[&str], dir: &Path) -> Value {
    let mut all = args.to_vec();
    all.push("--json");
    serde_json::from_str(&stdout(&ok(&all, dir))).expect("valid JSON")
}

#[test]
fn quarter_wave_coating_cancels_reflection() {
    // Macleod (2010) §4.2: n_c = √(1 · 4) = 2, d = 600/(4·2) = 75 nm → R = 0 at 600 nm, 0°.
    let dir = tempfile::tempdir().unwrap();
    let doc = json(
        &[
            "--above",
            "1",
            "--layer",
            "2:75",
            "--below",
            "4",
            "--wavelengths",
            "600",
        ],
        dir.path(),
    );
    let point = &doc["results"][0];
    let r = point["unpolarised"]["R"].as_f64().unwrap();
    assert!(r < 1e-12, "R = {r:e}");
    assert!((point["s"]["T"].as_f64().unwrap() - 1.0).abs() < 1e-12);
    assert!(point["s"]["A"][0].as_f64().unwrap().abs() < 1e-14);
}

#[test]
fn table_is_aligned_and_lists_each_layer() {
    let dir = tempfile::tempdir().unwrap();
    let o = ok(
        &[
            "--layer",
            "2.05+0.001i:75",
            "--layer",
            "1.45:10",
            "--below",
            "3.9+0.02i",
            "--angles",
            "0,60",
        ],
        dir.path(),
    );
    let text = stdout(&o);
    let lines: Vec<&str> = text.lines().collect();
    let header = lines
        .iter()
        .position(|l| l.contains("angle"))
        .expect("header line");
    assert!(lines[header].contains("A1 2.05+0.001i") && lines[header].contains("A2 1.45"));
    assert!(lines[header].contains("R_s") && lines[header].contains("R_p"));
    let width = lines[header].chars().count();
    assert_eq!(
        lines[header + 1].chars().count(),
        width,
        "rows aligned with the header"
    );
    assert_eq!(lines[header + 2].chars().count(), width);
    // Bare-interface limit of the first column: same stack, R_s at 0° equals R_p there.
    let cells: Vec<&str> = lines[header + 1].split_whitespace().collect();
    assert_eq!(cells[cells.len() - 1], cells[cells.len() - 2]);
}

#[test]
fn weighted_reflectance_of_a_constant_is_that_constant() {
    // A photon-weighted mean of a constant is the constant: bare n = 4 at normal incidence has
    // R = (3/5)² = 0.36 at every wavelength (Born & Wolf 1999 §1.5.2).
    let dir = tempfile::tempdir().unwrap();
    let args = [
        "--above",
        "1",
        "--below",
        "4",
        "--wavelengths",
        "300:1200:50",
    ];
    let doc = json(&args, dir.path());
    let w = &doc["weighted_reflectance"]["by_angle"][0]["unpolarised"];
    assert!((w.as_f64().unwrap() - 0.36).abs() < 1e-12, "{w}");
    let text = stdout(&ok(&args, dir.path()));
    assert!(
        text.contains("AM1.5G photon-weighted R (300–1200 nm"),
        "{text}"
    );
    // Not spanned: no figure, a hint instead.
    let text = stdout(&ok(
        &["--below", "4", "--wavelengths", "400:800:100"],
        dir.path(),
    ));
    assert!(!text.contains("AM1.5G photon-weighted R (") && text.contains("do not span"));
}

#[test]
fn a_quarter_wave_coating_ranks_better_than_bare_silicon() {
    // The AR coating must lower the AM1.5G-weighted reflectance of silicon (library data).
    let dir = tempfile::tempdir().unwrap();
    let weighted = |extra: &[&str]| {
        let mut args = vec!["--below", "si", "--wavelengths", "300:1200:20"];
        args.extend_from_slice(extra);
        json(&args, dir.path())["weighted_reflectance"]["by_angle"][0]["unpolarised"]
            .as_f64()
            .unwrap()
    };
    let (bare, coated) = (weighted(&[]), weighted(&["--layer", "1.95:75"]));
    assert!(bare > 0.3 && coated < 0.15, "bare {bare}, coated {coated}");
}

#[test]
fn csv_holds_every_number_at_full_precision() {
    let dir = tempfile::tempdir().unwrap();
    let args = [
        "--layer",
        "1.9+0.025i:80",
        "--below",
        "3.9+0.02i",
        "--wavelengths",
        "500,600",
        "--angles",
        "0:60:30",
        "--csv",
        "out.csv",
    ];
    let o = ok(&args, dir.path());
    let doc = json(&args[..args.len() - 2], dir.path());
    let csv = std::fs::read_to_string(dir.path().join("out.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| *h == name)
            .unwrap_or_else(|| panic!("no {name}"))
    };
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    assert_eq!(rows.len(), 6);
    // Same f64 bits as the library called directly with the same literal indices (the CLI
    // prints the shortest text that reads back exactly), and the JSON agrees too.
    let stack = FilmStack::new(
        c(1.0, 0.0),
        vec![Layer::new(c(1.9, 0.025), 80.0)],
        c(3.9, 0.02),
    )
    .unwrap();
    for (row, point) in rows.iter().zip(doc["results"].as_array().unwrap()) {
        let cos = row[col("angle_deg")].to_radians().cos();
        let direct = stack.solve(row[col("wavelength_nm")], cos);
        assert_eq!(row[col("R_s")].to_bits(), direct.s.reflectance.to_bits());
        assert_eq!(
            row[col("A1_p")].to_bits(),
            direct.p.absorptance[0].to_bits()
        );
        assert_eq!(row[col("r_p_im")].to_bits(), direct.p.r.im.to_bits());
        assert_eq!(
            row[col("T")].to_bits(),
            direct.transmittance_unpolarised().to_bits()
        );
        let from_json = point["p"]["A"][0].as_f64().unwrap();
        assert!((row[col("A1_p")] - from_json).abs() <= 1e-15 * from_json.abs());
        let sum = row[col("R")] + row[col("T")] + row[col("A1")];
        assert!((sum - 1.0).abs() < 1e-12);
    }
    assert!(stdout(&o).contains("R_s"));
    // Only the file itself is left in the folder (the temporary was renamed).
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
}

/// Bad input: exit code 1, one clear message naming the problem, no panic, no CSV written
/// and an existing CSV left untouched.
fn rejects(args: &[&str], expect_in_message: &[&str]) {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("old.csv"), "old content\n").unwrap();
    let mut all = args.to_vec();
    all.extend(["--csv", "old.csv"]);
    let o = film(&all, dir.path());
    let err = stderr(&o);
    assert_eq!(
        o.status.code(),
        Some(1),
        "{args:?}: exit {:?}, stderr {err}",
        o.status.code()
    );
    assert!(!err.contains("panicked"), "{args:?} panicked: {err}");
    assert!(err.starts_with("error: "), "{args:?}: {err}");
    for needle in expect_in_message {
        assert!(
            err.contains(needle),
            "{args:?}: message lacks `{needle}`:\n{err}"
        );
    }
    assert_eq!(
        std::fs::read_to_string(dir.path().join("old.csv")).unwrap(),
        "old content\n"
    );
    assert_eq!(
        std::fs::read_dir(dir.path()).unwrap().count(),
        1,
        "{args:?} left a file"
    );
}

#[test]
fn unknown_material_gets_suggestions() {
    rejects(&["--below", "sinx"], &["--below", "sinx", "did you mean"]);
    rejects(
        &["--below", "si", "--layer", "sillicon:75"],
        &["--layer 1", "unknown material `sillicon`"],
    );
}

#[test]
fn malformed_complex_index_is_rejected() {
    rejects(
        &["--below", "si", "--layer", "2.05+0.0x1i:75"],
        &["--layer 1", "2.05+0.0x1i"],
    );
    rejects(&["--below", "3.5-0.1i"], &["--below"]);
}

#[test]
fn zero_or_negative_thickness_is_rejected() {
    rejects(
        &["--below", "si", "--layer", "sinx:0"],
        &["--layer 1", "thickness", "> 0"],
    );
    rejects(
        &["--below", "si", "--layer", "1.5:10", "--layer", "2.0:-5"],
        &["--layer 2", "thickness"],
    );
}

#[test]
fn layer_without_thickness_is_rejected() {
    rejects(
        &["--below", "si", "--layer", "sinx"],
        &["--layer 1", "no thickness", "MATERIAL:THICKNESS_NM"],
    );
}

#[test]
fn angles_outside_the_hemisphere_are_rejected() {
    rejects(
        &["--below", "si", "--angles", "90"],
        &["--angles", "[0, 90)"],
    );
    rejects(&["--below", "si", "--angles", "0,-5"], &["--angles", "-5"]);
}

#[test]
fn wavelength_outside_material_data_is_rejected() {
    rejects(
        &["--below", "si", "--wavelengths", "100"],
        &["--below", "100"],
    );
    rejects(
        &["--below", "si", "--wavelengths", "300:abc:10"],
        &["--wavelengths"],
    );
}

#[test]
fn unreadable_or_malformed_material_csv_is_rejected() {
    rejects(&["--below", "./missing/nk.csv"], &["missing/nk.csv"]);
    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.csv");
    std::fs::write(&bad, "wavelength_nm,n,k\n500,2.0,0.0\n600,two,0.0\n").unwrap();
    rejects(&["--below", bad.to_str().unwrap()], &["bad.csv"]);
}

#[test]
fn csv_into_a_missing_folder_is_rejected_before_any_work() {
    let dir = tempfile::tempdir().unwrap();
    let o = film(
        &["--below", "4", "--csv", "no/such/folder/out.csv"],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("does not exist"));
}
