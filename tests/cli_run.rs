//! `lightfold run` end to end on a small scenario: the results folder holds every promised
//! file, summary.json closes the photon budget (absorber current + losses = the A = 1 current
//! over the grid, an identity of the accounting), and bad input exits 1 without output.

use std::process::Command;

fn lightfold(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_lightfold"))
        .args(args)
        .output()
        .unwrap()
}

const SMALL: &str = r#"
name = "small"
[light]
wavelengths_nm = "500:1100:200"
[[stack]]
kind = "interface"
name = "front"
texture = "upright-pyramids-10um"
coating = [{ material = "sinx-n2.09-vogt2015", thickness_nm = 75 }]
[[stack]]
kind = "layer"
name = "wafer"
material = "si"
thickness_um = 120
[[stack]]
kind = "interface"
name = "rear"
texture = "planar"
[below]
material = "ag-mcpeak2015"
[solver]
rays = 3000
"#;

#[test]
fn run_writes_a_complete_results_folder_with_a_closed_photon_budget() {
    let dir = tempfile::tempdir().unwrap();
    let scen = dir.path().join("small.toml");
    std::fs::write(&scen, SMALL).unwrap();
    let out_dir = dir.path().join("out");
    let out = lightfold(&[
        "run",
        scen.to_str().unwrap(),
        "-o",
        out_dir.to_str().unwrap(),
        "--json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for f in [
        "summary.json",
        "spectra.csv",
        "losses.csv",
        "generation.csv",
        "path_length.csv",
        "report.html",
        "spectrum.svg",
        "spectrum.png",
        "losses.png",
        "entering.svg",
    ] {
        assert!(out_dir.join(f).is_file(), "missing {f}");
    }
    let s: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let j = s["photocurrents_ma_cm2"][0]["j_ma_cm2"].as_f64().unwrap();
    let losses: f64 = s["losses_ma_cm2"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["j_ma_cm2"].as_f64().unwrap())
        .sum();
    let max = s["max_current_ma_cm2"].as_f64().unwrap();
    assert!(
        (j + losses - max).abs() < 1e-9 * max,
        "{j} + {losses} != {max}"
    );
    assert_eq!(s["rays_lost"].as_u64(), Some(0));
    assert!(s["energy_audit_max_error"].as_f64().unwrap() < 1e-12);
    // The same scenario again into the same folder is refused without --force.
    let again = lightfold(&[
        "run",
        scen.to_str().unwrap(),
        "-o",
        out_dir.to_str().unwrap(),
    ]);
    assert_eq!(again.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
}

#[test]
fn a_bad_scenario_exits_1_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let scen = dir.path().join("bad.toml");
    std::fs::write(
        &scen,
        SMALL.replace("thickness_um = 120", "thickness_um = -5"),
    )
    .unwrap();
    let out_dir = dir.path().join("out");
    let out = lightfold(&[
        "run",
        scen.to_str().unwrap(),
        "-o",
        out_dir.to_str().unwrap(),
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.contains("bad.toml:") && err.contains("thickness_um"),
        "{err}"
    );
    assert!(!out_dir.exists());
}

#[test]
fn compare_puts_two_designs_side_by_side() {
    let dir = tempfile::tempdir().unwrap();
    let a = dir.path().join("a.toml");
    let b = dir.path().join("b.toml");
    std::fs::write(&a, SMALL).unwrap();
    std::fs::write(
        &b,
        SMALL
            .replace("name = \"small\"", "name = \"planar\"")
            .replace("upright-pyramids-10um", "planar"),
    )
    .unwrap();
    let out_dir = dir.path().join("cmp");
    let out = lightfold(&[
        "compare",
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        "-o",
        out_dir.to_str().unwrap(),
        "--json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let j = |i: usize| v[i]["photocurrent_ma_cm2"].as_f64().unwrap();
    // Pyramids trap light and cut front reflection: more current than a planar front with
    // the same coating (common practice, no source).
    assert!(j(0) > j(1) + 1.0, "{} vs {}", j(0), j(1));
    for f in ["compare.csv", "compare.html", "compare_losses.png"] {
        assert!(out_dir.join(f).is_file(), "missing {f}");
    }
    // A bad scenario among them: exit 1, nothing written.
    std::fs::write(&b, "name = 3").unwrap();
    let out_dir2 = dir.path().join("cmp2");
    let out = lightfold(&[
        "compare",
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        "-o",
        out_dir2.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1));
    assert!(!out_dir2.exists());
}

#[test]
fn matrix_mode_agrees_with_direct_mode_on_the_absorber_current() {
    // Same wafer, both solvers (DESIGN §5: they must agree within Monte Carlo and binning
    // error; the element-wise comparison is in tests/matrix_vs_direct.rs).
    let dir = tempfile::tempdir().unwrap();
    // Strongly and moderately absorbed light only: near the band gap, regular pyramids over a
    // planar mirror keep light paths so correlated that 10 × 4 bins are too coarse (several
    // per cent of binning error there; tests/matrix_vs_direct.rs refines the bins).
    let small = SMALL.replace("500:1100:200", "500:900:200");
    let direct = small.replace("rays = 3000", "rays = 20000");
    let matrix = small.replace(
        "rays = 3000",
        "mode = \"matrix\"\nrays = 2048\npolar_bins = 10\nazimuth_bins = 4",
    );
    let mut j = Vec::new();
    for (name, text) in [("d", direct), ("m", matrix)] {
        let scen = dir.path().join(format!("{name}.toml"));
        std::fs::write(&scen, text).unwrap();
        let out = lightfold(&[
            "run",
            scen.to_str().unwrap(),
            "-o",
            dir.path().join(name).to_str().unwrap(),
            "--json",
        ]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let s: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        assert_eq!(
            s["mode"].as_str(),
            Some(if name == "d" { "direct" } else { "matrix" })
        );
        assert!(s["energy_audit_max_error"].as_f64().unwrap() < 1e-9);
        j.push((
            s["photocurrents_ma_cm2"][0]["j_ma_cm2"].as_f64().unwrap(),
            s["photocurrents_ma_cm2"][0]["std_error_ma_cm2"]
                .as_f64()
                .unwrap(),
        ));
    }
    // Tolerance: 4σ of the direct run plus 1 % for binning (10 polar bins) and the matrix
    // build's own noise, which is not propagated.
    let tol = 4.0 * j[0].1 + 0.01 * j[0].0;
    assert!(
        (j[0].0 - j[1].0).abs() < tol,
        "direct {:?} vs matrix {:?}",
        j[0],
        j[1]
    );
}
