//! `lightfold limit`: Lambertian (4n²) and simple references for a wafer of given thickness:
//! photocurrents under a spectrum and a per-wavelength table. Thin: parse, call
//! `wafer::limits`, print.

use std::io::Write;
use std::path::{Path, PathBuf};

use super::Failure;
use lightfold::optics::materials;
use lightfold::spectrum::{Spectrum, WavelengthGrid};
use lightfold::wafer::limits::{
    LimitSummary, SILICON_GAP_WAVELENGTH_NM, lambertian_enhancement, limit_summary,
};

/// Lambertian (4n²) limit and single/double-pass references for a wafer.
#[derive(clap::Args)]
pub struct LimitArgs {
    /// Wafer thickness in µm.
    #[arg(long, value_name = "UM", allow_negative_numbers = true)]
    pub thickness_um: f64,

    /// Wafer material: library id or alias, a CSV file `wavelength_nm,n,k`, or a constant index.
    #[arg(long, default_value = "si")]
    pub material: String,

    /// Wavelength grid in nm: `start:stop:step` or a list `a,b,c` (at least two points).
    /// The photocurrents integrate over its first to last wavelength.
    #[arg(long, default_value = "300:1200:10", value_name = "NM")]
    pub wavelengths: String,

    /// Spectrum: a built-in id (am1.5g, am1.5d, g173-etr) or a two-column file (path with `/`
    /// or ending in `.csv`).
    #[arg(long, default_value = "am1.5g")]
    pub spectrum: String,

    /// Write the per-wavelength table to this CSV file.
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,

    /// Print machine-readable JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

const ASSUMPTIONS: &str = "ideal Lambertian wafer: no reflection from outside, Lambertian \
radiance inside, ideal rear mirror, escape 1/n^2 per arrival at the front; single pass \
1 - exp(-aW), double pass 1 - exp(-2aW); no free-carrier or parasitic absorption";

pub fn run(args: LimitArgs) -> Result<(), Failure> {
    let bad = |m: String| Failure::BadInput(m);
    if !(args.thickness_um.is_finite() && args.thickness_um > 0.0) {
        return Err(bad(format!(
            "--thickness-um {}: expected a positive thickness in µm\n  fix: e.g. --thickness-um 160",
            args.thickness_um
        )));
    }
    let material = materials::resolve(&args.material).map_err(|e| bad(e.to_string()))?;
    let grid =
        WavelengthGrid::parse(&args.wavelengths).map_err(|e| bad(format!("--wavelengths: {e}")))?;
    let grid = grid.as_slice();
    if grid.len() < 2 {
        return Err(bad(format!(
            "--wavelengths `{}` gives {} wavelength\n  expected: at least two, to integrate over a band\n  fix: e.g. 300:1200:10",
            args.wavelengths,
            grid.len()
        )));
    }
    let spectrum_owned;
    let spectrum: &Spectrum =
        if args.spectrum.contains('/') || args.spectrum.to_ascii_lowercase().ends_with(".csv") {
            spectrum_owned =
                Spectrum::from_csv(Path::new(&args.spectrum)).map_err(|e| bad(e.to_string()))?;
            &spectrum_owned
        } else {
            Spectrum::builtin(&args.spectrum).map_err(|e| bad(e.to_string()))?
        };
    let mut n = Vec::with_capacity(grid.len());
    let mut k = Vec::with_capacity(grid.len());
    for &wl in grid {
        let idx = material.index_at(wl).map_err(|e| bad(e.to_string()))?;
        n.push(idx.re);
        k.push(idx.im);
    }
    let summary =
        limit_summary(spectrum, grid, &n, &k, args.thickness_um).map_err(|e| bad(e.to_string()))?;
    if let Some(path) = &args.csv {
        write_csv(path, &summary)?;
    }
    let text = if args.json {
        let value = serde_json::json!({
            "material": material.id(),
            "spectrum": spectrum.id(),
            "assumptions": ASSUMPTIONS,
            "gap_wavelength_nm": SILICON_GAP_WAVELENGTH_NM,
            "summary": summary,
        });
        serde_json::to_string_pretty(&value).map_err(|e| Failure::Internal(e.to_string()))? + "\n"
    } else {
        text_report(&summary, material.id(), spectrum.id())
    };
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|_| out.flush())
        .map_err(|e| Failure::Internal(format!("cannot write to standard output: {e}")))
}

fn text_report(s: &LimitSummary, material: &str, spectrum: &str) -> String {
    let (lo, hi) = s.band_nm;
    let gap_hi = hi.min(SILICON_GAP_WAVELENGTH_NM);
    let mut t = format!(
        "Wafer {} µm of {material} under {spectrum}, {lo}–{hi} nm ({} grid points; currents at the spectrum's native resolution)\n",
        s.thickness_um,
        s.points.len()
    );
    let rows = [
        (
            "J Tiedje–Yablonovitch Lambertian (e^-4aW)",
            s.tiedje_yablonovitch_ma_cm2,
        ),
        (
            "J exact ideal Lambertian (2E3(2aW))",
            s.lambertian_exact_ma_cm2,
        ),
        ("J double pass (1 - e^-2aW)", s.double_pass_ma_cm2),
        ("J single pass (1 - e^-aW)", s.single_pass_ma_cm2),
    ];
    for (name, v) in rows {
        t += &format!("  {name:<44} {v:>8.3} mA/cm²\n");
    }
    t += &format!(
        "  {:<44} {:>8.3} mA/cm²\n",
        format!("J max, A = 1, {lo}–{gap_hi} nm (band gap)"),
        s.max_to_gap_ma_cm2
    );
    t += &format!(
        "  {:<44} {:>8.3} mA/cm²\n",
        format!("J max, A = 1, {lo}–{hi} nm"),
        s.max_band_ma_cm2
    );
    t += &format!(
        "  exact − TY: {:+.3} mA/cm²\nAssumptions: {ASSUMPTIONS}.\n",
        s.lambertian_exact_ma_cm2 - s.tiedje_yablonovitch_ma_cm2
    );
    t
}

fn write_csv(path: &Path, s: &LimitSummary) -> Result<(), Failure> {
    let mut text = String::from(
        "wavelength_nm,n,k,alpha_per_cm,single_pass,double_pass,lambertian_exact,tiedje_yablonovitch,enhancement_4n2\n",
    );
    for p in &s.points {
        text += &format!(
            "{},{},{},{},{:.12},{:.12},{:.12},{:.12},{:.6}\n",
            p.wavelength_nm,
            p.n,
            p.k,
            p.alpha_per_cm,
            p.single_pass,
            p.double_pass,
            p.lambertian_exact,
            p.tiedje_yablonovitch,
            lambertian_enhancement(p.n)
        );
    }
    // Temporary file in the same folder, then rename: never half a file.
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.tmp"));
    std::fs::write(&tmp, text)
        .and_then(|_| std::fs::rename(&tmp, path))
        .map_err(|e| {
            let _ = std::fs::remove_file(&tmp);
            Failure::BadInput(format!(
                "{}: cannot write: {e}\n  fix: check the folder exists and is writable",
                path.display()
            ))
        })
}
