//! Exchange format for redistribution matrices: NPY arrays plus a JSON sidecar.
//!
//! `write(dir, stem)` produces `<stem>.json` and one `<stem>_<name>.npy` per array:
//! `r_above`, `t_above`, `a_above`, `r_below`, `t_below`, `a_below` (and `se_<name>` for
//! Monte Carlo standard errors). R and T are n × n (rows outgoing bins, columns incoming
//! bins), A is L × n (rows film layers top to bottom). The sidecar states the format name
//! and version (`"lightfold-matrices"`, 1), the bins (edges, centres, étendue, index order,
//! direction convention), wavelength, the medium on each side (id, real n), the
//! normalisation, the audits and every array's file name and shape. Files are written to a
//! temporary name in the same folder and renamed, the sidecar last.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use super::bins::{AngleBins, symmetry_from_name};
use super::dense::Matrix;
use super::matrix::{Audit, InterfaceMatrices, InterfaceSetup, MediumInfo, SideMatrices};
use super::{MatrixError, npy};

/// Format name written into every sidecar.
pub const FORMAT_NAME: &str = "lightfold-matrices";
/// Format version this build writes and reads.
pub const FORMAT_VERSION: u32 = 1;

const NORMALISATION: &str = "Column j holds the fate of the power arriving in bin j with uniform \
radiance over the bin (uniform in sin^2(theta) and azimuth), as fractions of that power: \
R[i,j] leaves back into the incidence medium in bin i, T[i,j] enters the other medium in bin i, \
A[l,j] is absorbed in film layer l. Each column of R, T and A together sums to 1 up to the \
energy audit.";

const CONVENTIONS: &str = "Directions are propagation directions (x, y, z), z up. theta is \
measured from the z axis of the direction's own hemisphere (cos(theta) = |z|), in the medium \
the light travels in. *_above: incoming bins travel down in the medium above; R rows travel up \
in the medium above; T rows travel down in the medium below. *_below: incoming bins travel up \
in the medium below; R rows travel down in the medium below; T rows travel up in the medium \
above. Azimuth phi = atan2(y, x) of the propagation direction, folded by the symmetry \
(mirror: |x|,|y|; square: |x|,|y| sorted so y <= x). Bin index = polar * n_azimuth + azimuth. \
A folded bin stands for its whole orbit: etendue and solid angle are those of the orbit. \
Reciprocity: n_j^2 e_j M[i,j] = n_i^2 e_i M'[rev j, rev i], rev = azimuth + pi.";

#[derive(serde::Serialize, serde::Deserialize)]
struct BinsRecord {
    n_polar: usize,
    n_azimuth: usize,
    symmetry: String,
    index_order: String,
    polar_edges_sin2: Vec<f64>,
    polar_edges_deg: Vec<f64>,
    azimuth_edges_deg: Vec<f64>,
    /// (θ, φ) of each bin centre, degrees.
    centres_deg: Vec<[f64; 2]>,
    /// Unit propagation direction of each bin centre for the down-going hemisphere
    /// (flip z for up-going).
    centre_directions_down: Vec<[f64; 3]>,
    etendue_sr: Vec<f64>,
    solid_angle_sr: Vec<f64>,
}

#[derive(serde::Serialize, serde::Deserialize)]
struct ArrayRecord {
    file: String,
    shape: [usize; 2],
    rows: String,
    cols: String,
}

#[derive(serde::Serialize, serde::Deserialize)]
struct Sidecar {
    format: String,
    version: u32,
    wavelength_nm: f64,
    provenance: String,
    above: MediumInfo,
    below: MediumInfo,
    film_layers: Vec<String>,
    bins: BinsRecord,
    normalisation: String,
    conventions: String,
    audits: Audit,
    arrays: BTreeMap<String, ArrayRecord>,
}

/// Names of the six arrays, their matrices, and their row/column meaning.
fn arrays_of(
    s: &(SideMatrices, SideMatrices),
) -> [(&'static str, &Matrix, &'static str, &'static str); 6] {
    let (a, b) = (&s.0, &s.1);
    let inc_a = "incoming bins, travelling down in the medium above";
    let inc_b = "incoming bins, travelling up in the medium below";
    [
        (
            "r_above",
            &a.reflection,
            "outgoing bins, travelling up in the medium above",
            inc_a,
        ),
        (
            "t_above",
            &a.transmission,
            "outgoing bins, travelling down in the medium below",
            inc_a,
        ),
        (
            "a_above",
            &a.absorption,
            "film layers, top to bottom",
            inc_a,
        ),
        (
            "r_below",
            &b.reflection,
            "outgoing bins, travelling down in the medium below",
            inc_b,
        ),
        (
            "t_below",
            &b.transmission,
            "outgoing bins, travelling up in the medium above",
            inc_b,
        ),
        (
            "a_below",
            &b.absorption,
            "film layers, top to bottom",
            inc_b,
        ),
    ]
}

fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), MatrixError> {
    let tmp = path.with_extension(format!(
        "{}.tmp",
        path.extension().and_then(|e| e.to_str()).unwrap_or("")
    ));
    std::fs::write(&tmp, bytes)
        .and_then(|_| std::fs::rename(&tmp, path))
        .map_err(|source| {
            let _ = std::fs::remove_file(&tmp);
            MatrixError::Write {
                path: path.to_path_buf(),
                source,
            }
        })
}

impl InterfaceMatrices {
    /// Writes `<dir>/<stem>.json` and the NPY arrays beside it; returns the sidecar path.
    pub fn write(&self, dir: &Path, stem: &str) -> Result<PathBuf, MatrixError> {
        let bins = &self.setup.bins;
        let n = bins.len();
        let main = (self.from_above.clone(), self.from_below.clone());
        let mut records = BTreeMap::new();
        let mut sets: Vec<(&str, &(SideMatrices, SideMatrices))> = vec![("", &main)];
        if let Some(se) = &self.std_error {
            sets.push(("se_", se));
        }
        for (prefix, set) in sets {
            for (name, m, rows, cols) in arrays_of(set) {
                let key = format!("{prefix}{name}");
                let file = format!("{stem}_{key}.npy");
                write_atomic(&dir.join(&file), &npy::encode(m))?;
                let rows = if prefix.is_empty() {
                    rows.to_string()
                } else {
                    format!("standard error; {rows}")
                };
                records.insert(
                    key,
                    ArrayRecord {
                        file,
                        shape: [m.rows(), m.cols()],
                        rows,
                        cols: cols.into(),
                    },
                );
            }
        }
        let sidecar = Sidecar {
            format: FORMAT_NAME.into(),
            version: FORMAT_VERSION,
            wavelength_nm: self.setup.wavelength_nm,
            provenance: self.provenance.clone(),
            above: self.setup.above.clone(),
            below: self.setup.below.clone(),
            film_layers: self.setup.film_layers.clone(),
            bins: BinsRecord {
                n_polar: bins.n_polar(),
                n_azimuth: bins.n_azimuth(),
                symmetry: bins.symmetry_name().into(),
                index_order: "bin = polar * n_azimuth + azimuth".into(),
                polar_edges_sin2: bins.sin2_edges().to_vec(),
                polar_edges_deg: bins.polar_edges_deg(),
                azimuth_edges_deg: bins.azimuth_edges_deg(),
                centres_deg: (0..n)
                    .map(|i| {
                        let (t, p) = bins.centre_angles(i);
                        [t.to_degrees(), p.to_degrees()]
                    })
                    .collect(),
                centre_directions_down: (0..n)
                    .map(|i| bins.centre(i, super::Hemisphere::Down).to_array())
                    .collect(),
                etendue_sr: (0..n).map(|i| bins.etendue(i)).collect(),
                solid_angle_sr: (0..n).map(|i| bins.solid_angle_sr(i)).collect(),
            },
            normalisation: NORMALISATION.into(),
            conventions: CONVENTIONS.into(),
            audits: self.audit.clone(),
            arrays: records,
        };
        let path = dir.join(format!("{stem}.json"));
        let text = serde_json::to_string_pretty(&sidecar).map_err(|e| MatrixError::Write {
            path: path.clone(),
            source: std::io::Error::other(e),
        })?;
        write_atomic(&path, text.as_bytes())?;
        Ok(path)
    }

    /// Reads a sidecar and its arrays, validating format, version, bins, file presence,
    /// dtype and every shape; the audits are recomputed from the numbers read.
    pub fn read(sidecar_path: &Path) -> Result<Self, MatrixError> {
        let text = std::fs::read_to_string(sidecar_path).map_err(|source| MatrixError::Read {
            path: sidecar_path.to_path_buf(),
            source,
        })?;
        let value: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
            MatrixError::format(
                sidecar_path,
                format!("line {}:{}: {e}", e.line(), e.column()),
                "a JSON sidecar written by lightfold",
                "point at the .json file beside the .npy arrays",
            )
        })?;
        let format = value.get("format").and_then(|v| v.as_str()).unwrap_or("");
        if format != FORMAT_NAME {
            return Err(MatrixError::format(
                sidecar_path,
                format!("format `{format}`"),
                &format!("format `{FORMAT_NAME}`"),
                "this file is not a lightfold matrix sidecar",
            ));
        }
        let version = value.get("version").and_then(|v| v.as_u64());
        if version != Some(FORMAT_VERSION as u64) {
            return Err(MatrixError::format(
                sidecar_path,
                format!(
                    "unknown format version {}",
                    version.map_or("(missing)".into(), |v| v.to_string())
                ),
                &format!("version {FORMAT_VERSION}"),
                "read it with the lightfold version that wrote it, or export it again",
            ));
        }
        let sc: Sidecar = serde_json::from_value(value).map_err(|e| {
            MatrixError::format(
                sidecar_path,
                format!("{e}"),
                "every field of a version-1 sidecar",
                "export the matrices again with `lightfold matrices`",
            )
        })?;
        let symmetry = symmetry_from_name(&sc.bins.symmetry).ok_or_else(|| {
            MatrixError::format(
                sidecar_path,
                format!("bins.symmetry `{}`", sc.bins.symmetry),
                "one of isotropic, square, mirror, none",
                "correct the symmetry name",
            )
        })?;
        let bins =
            AngleBins::from_sin2_edges(&sc.bins.polar_edges_sin2, sc.bins.n_azimuth, symmetry)
                .map_err(|e| {
                    MatrixError::format(sidecar_path, e.to_string(), "valid bins", "correct bins")
                })?;
        if bins.n_polar() != sc.bins.n_polar {
            return Err(MatrixError::format(
                sidecar_path,
                format!(
                    "bins.n_polar = {} but {} polar edges",
                    sc.bins.n_polar,
                    sc.bins.polar_edges_sin2.len()
                ),
                "n_polar + 1 edges",
                "make n_polar and polar_edges_sin2 agree",
            ));
        }
        let (n, l) = (bins.len(), sc.film_layers.len());
        let dir = sidecar_path.parent().unwrap_or(Path::new("."));
        let load = |key: &str, rows: usize| -> Result<Matrix, MatrixError> {
            let rec = sc.arrays.get(key).ok_or_else(|| {
                MatrixError::format(
                    sidecar_path,
                    format!("array `{key}` is not listed under `arrays`"),
                    "r_above, t_above, a_above, r_below, t_below, a_below",
                    "export the matrices again",
                )
            })?;
            if rec.shape != [rows, n] {
                return Err(MatrixError::format(
                    sidecar_path,
                    format!("array `{key}` is listed with shape {:?}", rec.shape),
                    &format!("[{rows}, {n}] for {n} bins and {l} film layers"),
                    "the sidecar and its bins disagree: export again",
                ));
            }
            let path = dir.join(&rec.file);
            let bytes = std::fs::read(&path).map_err(|source| MatrixError::Read {
                path: path.clone(),
                source,
            })?;
            let m = npy::decode(&bytes, &path)?;
            if (m.rows(), m.cols()) != (rows, n) {
                return Err(MatrixError::format(
                    &path,
                    format!("shape ({}, {})", m.rows(), m.cols()),
                    &format!(
                        "({rows}, {n}) as the sidecar {} states",
                        sidecar_path.display()
                    ),
                    "the array file does not belong to this sidecar: export again",
                ));
            }
            Ok(m)
        };
        let side = |prefix: &str, which: &str| -> Result<SideMatrices, MatrixError> {
            Ok(SideMatrices {
                reflection: load(&format!("{prefix}r_{which}"), n)?,
                transmission: load(&format!("{prefix}t_{which}"), n)?,
                absorption: load(&format!("{prefix}a_{which}"), l)?,
            })
        };
        let from_above = side("", "above")?;
        let from_below = side("", "below")?;
        let std_error = if sc.arrays.keys().any(|k| k.starts_with("se_")) {
            Some((side("se_", "above")?, side("se_", "below")?))
        } else {
            None
        };
        let setup = InterfaceSetup {
            bins,
            wavelength_nm: sc.wavelength_nm,
            above: sc.above,
            below: sc.below,
            film_layers: sc.film_layers,
        };
        InterfaceMatrices::new(setup, from_above, from_below, std_error, sc.provenance).map_err(
            |e| {
                MatrixError::format(
                    sidecar_path,
                    e.to_string(),
                    "consistent matrices",
                    "export again",
                )
            },
        )
    }
}
