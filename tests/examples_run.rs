//! Every example scenario runs as written (with fewer rays): the photon budget closes and no
//! ray is lost. The physics of each figure is checked elsewhere; this pins that the examples
//! a new user copies keep working.

use lightfold::scenario::Scenario;
use std::path::Path;

fn few_rays(text: &str) -> String {
    text.replace("rays = 10000", "rays = 256")
        .replace("target_std_error = 0.003", "target_std_error = 0.05")
        .replace("max_rays = 200000", "max_rays = 4096")
}

#[test]
fn every_example_runs_with_few_rays() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut files = vec![];
    for entry in std::fs::read_dir(&root)
        .unwrap()
        .chain(std::fs::read_dir(root.join("inverted-vs-random-thin-wafer")).unwrap())
    {
        let p = entry.unwrap().path();
        if p.extension().is_some_and(|e| e == "toml") {
            files.push(p);
        }
    }
    assert!(files.len() >= 4, "{files:?}");
    for f in files {
        let text = few_rays(&std::fs::read_to_string(&f).unwrap());
        let s = Scenario::from_str(&text, &f).unwrap_or_else(|e| panic!("{}: {e}", f.display()));
        let r = lightfold::simulate::run(&s, &|_, _| {})
            .unwrap_or_else(|e| panic!("{}: {e}", f.display()));
        assert_eq!(r.lost_rays_total, 0, "{}", f.display());
        assert!(r.energy_error_max < 1e-9, "{}", f.display());
        let losses: f64 = r.losses.iter().map(|l| l.j_ma_cm2).sum();
        let j = r.absorber_current().j_ma_cm2;
        assert!(
            (j + losses - r.max_current_ma_cm2).abs() < 1e-6 * r.max_current_ma_cm2,
            "{}",
            f.display()
        );
        // Between a third of the A = 1 current and the Lambertian limit (+ Monte Carlo slack).
        assert!(
            j > r.max_current_ma_cm2 / 3.0 && j < r.limits.tiedje_yablonovitch_ma_cm2 + 0.5,
            "{}: J = {j}",
            f.display()
        );
    }
}
