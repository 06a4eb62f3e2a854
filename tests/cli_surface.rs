//! `lightfold surface` as a user meets it: a planar bare interface reproduces the Fresnel
//! reflectance (Born & Wolf 1999, §1.5.3) in its JSON, and bad input gives a clear message,
//! exit code 1 and no output file.

use std::process::Command;

fn lightfold(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_lightfold"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn planar_json_matches_fresnel_and_csv_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("s.csv");
    let out = lightfold(&[
        "surface",
        "--texture",
        "planar",
        "--below",
        "3.5",
        "--rays",
        "40000",
        "--json",
        "--csv",
        csv.to_str().unwrap(),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let p = &v["points"][0];
    let r = p["reflectance"].as_f64().unwrap();
    let se = p["reflectance_se"].as_f64().unwrap();
    let exact = (2.5f64 / 4.5).powi(2);
    assert!((r - exact).abs() < 4.0 * se, "{r} ± {se} vs {exact}");
    assert_eq!(p["lost_rays"].as_u64(), Some(0));
    let text = std::fs::read_to_string(&csv).unwrap();
    assert!(
        text.lines()
            .nth(1)
            .unwrap()
            .starts_with("wavelength_nm,angle_deg,rays,reflectance")
    );
    assert_eq!(text.lines().count(), 3);
}

#[test]
fn bad_input_exits_1_with_a_message_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("s.csv");
    let c = csv.to_str().unwrap();
    for (args, needle) in [
        (
            vec![
                "surface",
                "--texture",
                "regular-pyramids,base_um=5,base_angle_deg=95",
                "--csv",
                c,
            ],
            "angle",
        ),
        (
            vec![
                "surface",
                "--texture",
                "regular-pyramids,base_um=-1",
                "--csv",
                c,
            ],
            "base_um",
        ),
        (
            vec![
                "surface",
                "--texture",
                "regular-pyramids,base_um=10,period_um=5",
                "--csv",
                c,
            ],
            "period",
        ),
        (
            vec!["surface", "--texture", "planar", "--rays", "0", "--csv", c],
            "--rays",
        ),
        (
            vec![
                "surface",
                "--texture",
                "planar",
                "--below",
                "unobtainium",
                "--csv",
                c,
            ],
            "unobtainium",
        ),
        (
            vec![
                "surface",
                "--texture",
                "planar",
                "--layer",
                "sio2-malitson1965",
                "--csv",
                c,
            ],
            "thickness",
        ),
        (
            vec![
                "surface",
                "--texture",
                "planar",
                "--angles",
                "95",
                "--csv",
                c,
            ],
            "[0, 90)",
        ),
        (
            vec![
                "surface",
                "--texture",
                "planar",
                "--wavelengths",
                "2400",
                "--csv",
                c,
            ],
            "si",
        ),
        (
            vec!["surface", "--texture", "nothing/here.toml", "--csv", c],
            "no such file",
        ),
        (
            vec![
                "surface",
                "--texture",
                "planar",
                "--pol",
                "circular",
                "--csv",
                c,
            ],
            "--pol",
        ),
    ] {
        let out = lightfold(&args);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{args:?}: {err}");
        assert!(
            err.contains(needle),
            "{args:?}: message lacks `{needle}`: {err}"
        );
        assert!(!err.contains("panicked"), "{err}");
        assert!(!csv.exists(), "{args:?} left a file");
    }
}
