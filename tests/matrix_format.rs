//! The matrix exchange format: NPY arrays as specified by NumPy Enhancement Proposal 1
//! ("A simple file format for NumPy arrays", 2007) plus a JSON sidecar; round trip and the
//! errors a user meets with wrong or damaged files.

use std::path::Path;

use lightfold::redistribution::{
    AngleBins, InterfaceMatrices, InterfaceResponse, InterfaceSetup, MatrixError, MatrixTally,
    MediumInfo, Side,
};
use lightfold::texture::Symmetry;

fn sample_matrices() -> InterfaceMatrices {
    let bins = AngleBins::equal_etendue(5, 3, Symmetry::Square).unwrap();
    let setup = InterfaceSetup {
        bins,
        wavelength_nm: 950.0,
        above: MediumInfo::new("air", 1.0),
        below: MediumInfo::new("si", 3.58),
        film_layers: vec!["sinx".into()],
    };
    InterfaceMatrices::planar(setup, |c, side| {
        // A smooth made-up lossy response: enough to fill every array.
        let r = 0.05 + 0.2 * (1.0 - c).powi(3);
        let a = 0.01 * c;
        let c_crit = (1.0 - 1.0 / (3.58f64 * 3.58)).sqrt();
        let r = if side == Side::Below && c < c_crit {
            1.0 - a
        } else {
            r
        };
        InterfaceResponse {
            reflectance: r,
            transmittance: 1.0 - r - a,
            absorptance: vec![a],
        }
    })
    .unwrap()
}

#[test]
fn analytic_matrices_round_trip_bit_for_bit() {
    let dir = tempfile::tempdir().unwrap();
    let m = sample_matrices();
    let path = m.write(dir.path(), "front_950nm").unwrap();
    let back = InterfaceMatrices::read(&path).unwrap();
    assert_eq!(back, m);
    let text = std::fs::read_to_string(&path).unwrap();
    for key in [
        "\"lightfold-matrices\"",
        "\"version\": 1",
        "\"wavelength_nm\": 950.0",
        "normalisation",
        "front_950nm_r_above.npy",
        "etendue_sr",
    ] {
        assert!(text.contains(key), "sidecar lacks {key}");
    }
    // No temporary files are left behind.
    assert!(
        std::fs::read_dir(dir.path()).unwrap().all(|e| !e
            .unwrap()
            .path()
            .to_string_lossy()
            .ends_with(".tmp"))
    );
}

#[test]
fn monte_carlo_matrices_round_trip_with_standard_errors() {
    let m = sample_matrices();
    let mut tally = MatrixTally::new(m.setup.clone()).unwrap();
    let n = m.n_bins();
    for side in [Side::Above, Side::Below] {
        for j in 0..n {
            for batch in 0..3 {
                let mut b = tally.batch(side, j);
                for r in 0..4 {
                    b.launch(1.0);
                    if (r + batch + j) % 3 == 0 {
                        b.add(side, j, 1.0)
                    } else {
                        b.add(Side::Below, (j + r) % n, 1.0)
                    }
                }
                tally.add_batch(&b).unwrap();
            }
        }
    }
    let mc = tally.finish().unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = mc.write(dir.path(), "mc").unwrap();
    assert!(dir.path().join("mc_se_t_below.npy").exists());
    let back = InterfaceMatrices::read(&path).unwrap();
    assert_eq!(back.std_error, mc.std_error);
    assert_eq!(back.from_below, mc.from_below);
    assert!(back.audit.reciprocity_max_sigma.is_some());
}

fn write_sample(dir: &Path) -> std::path::PathBuf {
    sample_matrices().write(dir, "m").unwrap()
}

fn edit_sidecar(path: &Path, from: &str, to: &str) {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.contains(from), "sidecar lacks {from}");
    std::fs::write(path, text.replacen(from, to, 1)).unwrap();
}

#[test]
fn unknown_version_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = write_sample(dir.path());
    edit_sidecar(&p, "\"version\": 1", "\"version\": 7");
    let e = InterfaceMatrices::read(&p).unwrap_err().to_string();
    assert!(
        e.contains("unknown format version 7") && e.contains("m.json"),
        "{e}"
    );
}

#[test]
fn missing_array_file_names_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let p = write_sample(dir.path());
    std::fs::remove_file(dir.path().join("m_t_below.npy")).unwrap();
    let e = InterfaceMatrices::read(&p).unwrap_err();
    assert!(
        matches!(e, MatrixError::Read { .. }) && e.to_string().contains("m_t_below.npy"),
        "{e}"
    );
}

#[test]
fn array_of_the_wrong_shape_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = write_sample(dir.path());
    // Replace r_above (15 × 15) by the 1 × 15 absorption array of the same sidecar.
    std::fs::copy(
        dir.path().join("m_a_above.npy"),
        dir.path().join("m_r_above.npy"),
    )
    .unwrap();
    let e = InterfaceMatrices::read(&p).unwrap_err().to_string();
    assert!(
        e.contains("m_r_above.npy") && e.contains("shape (1, 15)") && e.contains("(15, 15)"),
        "{e}"
    );
}

#[test]
fn sidecar_shape_disagreeing_with_bins_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = write_sample(dir.path());
    edit_sidecar(&p, "\"n_azimuth\": 3", "\"n_azimuth\": 2");
    let e = InterfaceMatrices::read(&p).unwrap_err().to_string();
    assert!(e.contains("shape") && e.contains("m.json"), "{e}");
}

#[test]
fn wrong_dtype_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = write_sample(dir.path());
    let f = dir.path().join("m_t_above.npy");
    let mut bytes = std::fs::read(&f).unwrap();
    let at = bytes.windows(3).position(|w| w == b"<f8").unwrap();
    bytes[at + 1] = b'i'; // '<i8'
    std::fs::write(&f, bytes).unwrap();
    let e = InterfaceMatrices::read(&p).unwrap_err().to_string();
    assert!(
        e.contains("m_t_above.npy") && e.contains("<i8") && e.contains("astype"),
        "{e}"
    );
}

#[test]
fn not_a_sidecar_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("x.json");
    std::fs::write(&p, "{\"format\": \"something-else\", \"version\": 1}").unwrap();
    let e = InterfaceMatrices::read(&p).unwrap_err().to_string();
    assert!(
        e.contains("something-else") && e.contains("lightfold-matrices"),
        "{e}"
    );
    std::fs::write(&p, "{ not json").unwrap();
    let e = InterfaceMatrices::read(&p).unwrap_err().to_string();
    assert!(e.contains("x.json") && e.contains("line 1"), "{e}");
}
