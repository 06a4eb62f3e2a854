//! `lightfold check` as a user runs it: a valid scenario → its summary and exit code 0; a bad
//! one → every problem on stderr with file:line:column, exit code 1, nothing on stdout;
//! `--json` → the same in machine-readable form. Expected values are those written in the
//! scenario files.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn check(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lightfold"))
        .arg("check")
        .args(args)
        .output()
        .expect("the binary runs")
}

fn out(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn err(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn example(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join(rel)
}

#[test]
fn a_valid_scenario_prints_its_stack() {
    let p = example("module-stack.toml");
    let o = check(&[p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    let text = out(&o);
    assert!(text.contains("scenario `module-glass-eva-cell`"), "{text}");
    assert!(
        text.contains("glass-lowiron-5ppm-vogt2016, 3200 µm"),
        "{text}"
    );
    assert!(
        text.contains("eva-uv-transparent-vogt2016, 450 µm"),
        "{text}"
    );
    assert!(text.contains("si-green2008, 160 µm  ← absorber"), "{text}");
    assert!(
        text.contains("coating: sinx-n2.09-vogt2015 75 nm (conformal)"),
        "{text}"
    );
    assert!(text.contains("below:  al-mcpeak2015"), "{text}");
    assert!(text.contains("10000 rays per wavelength"), "{text}");
    assert!(text.trim_end().ends_with("ok: no problems found"));
    assert!(err(&o).is_empty());
}

#[test]
fn the_demo_file_checks() {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("src/scenario/demo.toml");
    let o = check(&[p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    assert!(
        out(&o).contains("features down"),
        "rear texture points out of the wafer"
    );
}

/// In matrix mode the ray budget counts per angle bin of each textured interface, and the
/// summary says so (at least 2048 per bin, whatever smaller number is given).
#[test]
fn matrix_mode_states_rays_per_angle_bin() {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/sweep/demo-matrix.toml");
    let o = check(&[p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    let text = out(&o);
    assert!(text.contains("redistribution matrices"), "{text}");
    assert!(
        text.contains("rays per angle bin and side for each textured interface"),
        "{text}"
    );
    assert!(!text.contains("rays per wavelength"), "{text}");
}

#[test]
fn a_bad_scenario_lists_every_problem_and_exits_1() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("bad.toml");
    std::fs::write(
        &p,
        "[light]\nwavelengths_nm = \"300:1200:10\"\npolar_angel_deg = 5\n\n\
         [[stack]]\nkind = \"interface\"\ntexture = \"planar\"\n\
         [[stack]]\nkind = \"layer\"\nmaterial = \"si\"\nthickness_um = -160\n\
         [[stack]]\nkind = \"interface\"\ntexture = \"random-pyramids-3mu\"\n",
    )
    .unwrap();
    let o = check(&[p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert!(out(&o).is_empty(), "nothing on stdout: {}", out(&o));
    let e = err(&o);
    let shown = p.display().to_string();
    assert!(e.starts_with(&format!("error: {shown}: 3 problems")), "{e}");
    assert!(
        e.contains(&format!("{shown}:3:1: unknown key `polar_angel_deg`")),
        "{e}"
    );
    assert!(e.contains("fix: did you mean `polar_angle_deg`?"), "{e}");
    assert!(e.contains(&format!("{shown}:11:16: `thickness_um`")), "{e}");
    assert!(
        e.contains(&format!(
            "{shown}:14:11: no geometry named \"random-pyramids-3mu\""
        )),
        "{e}"
    );
    assert!(
        e.contains("fix: did you mean \"random-pyramids-3um\"?"),
        "{e}"
    );
    // Sorted by line.
    let a = e.find(":3:1:").unwrap();
    let b = e.find(":11:16:").unwrap();
    let c = e.find(":14:11:").unwrap();
    assert!(a < b && b < c);
}

#[test]
fn json_output_for_valid_and_bad_scenarios() {
    let p = example("under-top-cell.toml");
    let o = check(&["--json", p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(0), "{}", err(&o));
    let v: serde_json::Value = serde_json::from_str(&out(&o)).unwrap();
    assert_eq!(v["ok"], true);
    assert_eq!(
        v["scenario"]["light"]["spectrum"],
        "top-cell-filtered-am15g"
    );
    assert_eq!(v["scenario"]["light"]["wavelength_range_nm"][0], 700.0);
    assert_eq!(v["scenario"]["absorber"], "wafer");
    assert_eq!(
        v["scenario"]["stack"][0]["coating"][0]["thickness_nm"],
        110.0
    );

    let dir = tempfile::tempdir().unwrap();
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, "[solver]\nrays = 0\n").unwrap();
    let o = check(&["--json", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_str(&out(&o)).unwrap();
    assert_eq!(v["ok"], false);
    let problems = v["problems"].as_array().unwrap();
    assert_eq!(problems.len(), 2, "{problems:#?}"); // no [[stack]], and rays = 0
    assert_eq!(problems[1]["line"], 2);
    assert_eq!(problems[1]["column"], 8);
    assert!(problems[1]["expected"].as_str().unwrap().contains("≥ 1"));
}

#[test]
fn missing_and_malformed_files_exit_1() {
    let o = check(&["/no/such/scenario.toml"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        err(&o).contains("/no/such/scenario.toml: cannot read scenario"),
        "{}",
        err(&o)
    );
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("broken.toml");
    std::fs::write(&p, "name = \"x\nrays = 1\n").unwrap();
    let o = check(&[p.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert!(
        err(&o).contains(&format!("{}:1:", p.display())),
        "{}",
        err(&o)
    );
    assert!(err(&o).contains("not valid TOML"), "{}", err(&o));
}
