//! Material data and dispersion models against published values: I. H. Malitson, J. Opt.
//! Soc. Am. 55, 1205 (1965) for fused silica; M. A. Green, Sol. Energy Mater. Sol. Cells 92,
//! 1305 (2008) for crystalline silicon; G. E. Jellison & F. A. Modine, Appl. Phys. Lett. 69,
//! 371 (1996) (+ erratum 69, 2137) for the Tauc–Lorentz model, checked against a numerical
//! Kramers–Kronig transform made with scipy (tests/reference/gen_tauc_lorentz.py →
//! tauc_lorentz_kk.json); the Drude limit of a free-electron gas. Also the user-facing
//! contract: range errors, literal indices, unknown ids, user files with line numbers.

use lightfold::optics::absorption_coefficient_per_cm;
use lightfold::optics::materials::{
    self, Cauchy, Dispersion, DrudeLorentz, DrudeTerm, HC_EV_NM, LorentzOscillator, Material,
    MaterialError, TaucLorentz,
};
use std::io::Write;

fn material(id: &str) -> Material {
    materials::by_id(id).unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn fused_silica_sellmeier_gives_malitson_n_d() {
    // Malitson (1965): n_d = 1.4585 at the helium d line, 587.56 nm, 20 °C (from memory;
    // the paper's measured table and its Sellmeier fit agree to about 1e-5).
    let n = material("sio2-malitson1965").index_at(587.56).unwrap();
    assert!((n.re - 1.4585).abs() < 5e-5, "n_d = {}", n.re);
    assert_eq!(n.im, 0.0);
    // The alias `sio2` names the same entry, and the id stays the full one.
    assert_eq!(material("sio2").id(), "sio2-malitson1965");
}

#[test]
fn crystalline_silicon_matches_green_2008_table() {
    // Green (2008), Table 1 at 300 K: n, k as printed (the same values are in
    // data/nk/si_green2008.csv); α in cm⁻¹ as printed in the same table (from memory:
    // 1.11e4 at 500 nm, 8.50e2 at 800 nm, 6.40e1 at 1000 nm, 3.5 at 1100 nm).
    let si = material("si");
    assert_eq!(si.id(), "si-green2008");
    let table = [
        // (λ nm, n, k, α cm⁻¹)
        (500.0, 4.294, 0.044165, 1.11e4),
        (800.0, 3.675, 0.0054113, 8.50e2),
        (1000.0, 3.572, 0.0005093, 6.40e1),
        (1100.0, 3.542, 3.0637e-5, 3.5),
    ];
    for (wl, n, k, alpha) in table {
        let idx = si.index_at(wl).unwrap();
        assert!(
            (idx.re - n).abs() < 1e-12 && (idx.im - k).abs() < 1e-12,
            "{wl} nm: {idx}"
        );
        let a = absorption_coefficient_per_cm(idx.im, wl);
        assert!(
            (a / alpha - 1.0).abs() < 0.01,
            "{wl} nm: α = {a} cm⁻¹, Green 2008: {alpha}"
        );
    }
    // Between table points: linear interpolation in n and k (the data convention).
    let (lo, hi) = (si.index_at(500.0).unwrap(), si.index_at(510.0).unwrap());
    let mid = si.index_at(505.0).unwrap();
    assert!((mid - 0.5 * (lo + hi)).norm() < 1e-12);
}

#[test]
fn outside_the_data_range_is_an_error_that_names_everything() {
    let si = material("si-green2008");
    for wl in [249.0, 1450.5, 2000.0] {
        let err = si.index_at(wl).unwrap_err();
        assert!(matches!(err, MaterialError::OutOfRange { .. }), "{err:?}");
        let msg = err.to_string();
        for part in [
            "si-green2008",
            "250",
            "1450",
            &format!("{wl}"),
            "never extrapolates",
        ] {
            assert!(msg.contains(part), "message lacks `{part}`: {msg}");
        }
    }
    // The ends themselves are inside.
    assert!(si.index_at(250.0).is_ok() && si.index_at(1450.0).is_ok());
    assert!(matches!(
        si.index_at(f64::NAN),
        Err(MaterialError::BadWavelength { .. })
    ));
    assert!(matches!(
        si.index_at(-5.0),
        Err(MaterialError::BadWavelength { .. })
    ));
}

#[test]
fn library_has_the_required_entries_with_citations() {
    let required = [
        "air",
        "si-green2008",
        "si-schinke2015",
        "sio2-malitson1965",
        "sio2-film-rodriguez2016",
        "sinx-n1.91-vogt2015",
        "sinx-n2.09-vogt2015",
        "sinx-n2.13-vogt2015",
        "sinx-beliaev2022",
        "si3n4-philipp1973",
        "si3n4-luke2015",
        "mgf2-crystal-dodge1984",
        "tio2-ald-siefke2016",
        "ito-minenkov2024",
        "azo-treharne2011",
        "zno-film-stelling2017",
        "ag-mcpeak2015",
        "ag-johnson-christy1972",
        "al-mcpeak2015",
        "al-rakic1995",
        "al2o3-film-franta2015",
        "glass-clear-rubin1985",
        "glass-lowiron-rubin1985",
        "glass-lowiron-5ppm-vogt2016",
        "eva-uv-transparent-vogt2016",
        "mapbi3-phillips2015",
        "mapbi3-ball2015",
    ];
    for id in required {
        let m = material(id);
        assert!(!m.source().is_empty() && !m.name().is_empty(), "{id}");
    }
    assert_eq!(
        material("air").index_at(12345.0).unwrap(),
        num_complex::Complex64::new(1.0, 0.0)
    );
    assert!(!material("air").is_absorbing_anywhere());
    assert!(material("si").is_absorbing_anywhere());
    assert!(!material("sio2").is_absorbing_anywhere());
    // The default perovskite covers the silicon band edge region to 1500 nm.
    assert!(material("mapbi3").range_nm().1 >= 1500.0);
    assert!(material("si").source().contains("Green"));
}

#[test]
fn literal_indices_parse_and_unphysical_ones_are_rejected() {
    for (text, n, k) in [
        ("3.5", 3.5, 0.0),
        ("1.5+0i", 1.5, 0.0),
        ("2.05+0.001i", 2.05, 0.001),
        (" 4 + 0.2j ", 4.0, 0.2),
    ] {
        let m = materials::resolve(text).unwrap_or_else(|e| panic!("{text}: {e}"));
        let idx = m.index_at(633.0).unwrap();
        assert_eq!((idx.re, idx.im), (n, k), "{text}");
        assert_eq!(m.range_nm().1, f64::INFINITY);
    }
    let negative_k = materials::resolve("2.05-0.001i").unwrap_err().to_string();
    assert!(
        negative_k.contains("k < 0") && negative_k.contains("n − ik"),
        "{negative_k}"
    );
    for bad in [
        "2.05+i0.1",
        "1.5+",
        "0",
        "-1.5",
        "1.5+0.1ii",
        "3.5.2",
        ".+.i",
    ] {
        let err = materials::resolve(bad).unwrap_err();
        assert!(
            matches!(err, MaterialError::BadLiteral { .. }),
            "{bad}: {err:?}"
        );
        assert!(
            err.to_string().contains("expected: n or n+ki"),
            "{bad}: {err}"
        );
    }
}

#[test]
fn unknown_ids_get_nearest_suggestions() {
    let err = materials::resolve("si-gren2008").unwrap_err();
    match &err {
        MaterialError::Unknown { suggestions, .. } => {
            assert_eq!(
                suggestions.first().map(String::as_str),
                Some("si-green2008")
            );
            assert!(suggestions.len() <= 3);
        }
        other => panic!("{other:?}"),
    }
    assert!(
        err.to_string().contains("did you mean `si-green2008`"),
        "{err}"
    );
    match materials::by_id("sinx").unwrap_err() {
        MaterialError::Unknown { suggestions, .. } => {
            assert_eq!(suggestions.len(), 3);
            assert!(
                suggestions.iter().all(|s| s.starts_with("sinx-")),
                "{suggestions:?}"
            );
        }
        other => panic!("{other:?}"),
    }
    // Ids are case-insensitive.
    assert_eq!(materials::by_id("Si").unwrap().id(), "si-green2008");
}

fn write_temp(text: &str) -> tempfile::NamedTempFile {
    let mut f = tempfile::Builder::new().suffix(".csv").tempfile().unwrap();
    f.write_all(text.as_bytes()).unwrap();
    f
}

#[test]
fn user_csv_file_is_read_and_interpolated() {
    let f = write_temp(
        "# material: my SiNx\n# reference: own ellipsometry\nwavelength_nm,n,k\n400,2.1,0.01\n600,2.0,0 # last\n",
    );
    let m = materials::resolve(f.path().to_str().unwrap()).unwrap();
    assert_eq!(m.name(), "my SiNx");
    assert_eq!(m.source(), "own ellipsometry");
    assert_eq!(m.range_nm(), (400.0, 600.0));
    let idx = m.index_at(500.0).unwrap();
    assert!((idx.re - 2.05).abs() < 1e-15 && (idx.im - 0.005).abs() < 1e-15);
    assert!(m.index_at(700.0).is_err());
}

#[test]
fn user_csv_errors_name_file_and_line() {
    let cases = [
        (
            "wavelength_nm,n,k\n400,2.1,0.01\n500,abc,0\n",
            3,
            "not a finite number",
        ),
        (
            "# c\n400,2.1,0.01\n\n500,2.0,-0.1\n",
            4,
            "k = -0.1 is negative",
        ),
        (
            "400,2.1,0.01\n500,2.0,0\n450,2.0,0\n",
            3,
            "does not increase",
        ),
        ("400,2.1\n", 1, "found 2 field(s)"),
        ("400,2.1,0\n", 1, "found 1 data row(s)"),
        ("wavelength_um,n,k\n0.4,2,0\n0.5,2,0\n", 1, "(× 1000)"),
        ("400,0,0\n500,2,0\n", 1, "n = 0 is not positive"),
    ];
    for (text, line, needle) in cases {
        let f = write_temp(text);
        let path = f.path().to_str().unwrap().to_string();
        let err = materials::resolve(&path).unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.starts_with(&format!("{path}:{line}: ")),
            "wanted line {line}: {msg}"
        );
        assert!(msg.contains(needle), "wanted `{needle}`: {msg}");
        assert!(msg.contains("fix: "), "{msg}");
    }
    let missing = materials::resolve("./no/such/file.csv").unwrap_err();
    assert!(matches!(missing, MaterialError::Read { .. }));
    assert!(missing.to_string().contains("./no/such/file.csv"));
}

#[test]
fn tauc_lorentz_has_no_absorption_below_the_gap_and_the_published_eps2() {
    // Hand calculation with A = 100 eV, E0 = 3.5 eV, C = 2 eV, Eg = 1.5 eV at E = 3 eV:
    // ε2 = A E0 C (E − Eg)² / [((E² − E0²)² + C²E²) E]
    //    = 100·3.5·2·2.25 / [((9 − 12.25)² + 4·9)·3] = 1575 / (46.5625·3) = 11.275168
    let m = TaucLorentz::new(1.0, 100.0, 3.5, 2.0, 1.5, (200.0, 2000.0)).unwrap();
    assert!(
        (m.eps2(3.0) - 11.275_167_785).abs() < 1e-8,
        "ε2 = {}",
        m.eps2(3.0)
    );
    let mat = Material::new("tl", "test TL", "hand values", Dispersion::TaucLorentz(m));
    // Below the gap (λ > hc/Eg = 826.6 nm) k is exactly 0; above it k > 0.
    for wl in [830.0, 1000.0, 2000.0] {
        assert_eq!(mat.index_at(wl).unwrap().im, 0.0, "{wl} nm");
    }
    let n = mat.index_at(HC_EV_NM / 3.0).unwrap();
    assert!(n.im > 0.0);
    assert!(
        (2.0 * n.re * n.im - 11.275_167_785).abs() < 1e-6,
        "2nk = ε2"
    );
}

#[test]
fn tauc_lorentz_eps1_matches_numerical_kramers_kronig() {
    let doc: serde_json::Value =
        serde_json::from_str(include_str!("reference/tauc_lorentz_kk.json")).unwrap();
    for set in doc["sets"].as_array().unwrap() {
        let p = |k: &str| set[k].as_f64().unwrap();
        let m = TaucLorentz::new(
            p("eps_inf"),
            p("a_ev"),
            p("e0_ev"),
            p("c_ev"),
            p("eg_ev"),
            (100.0, 3000.0),
        )
        .unwrap();
        for point in set["points"].as_array().unwrap() {
            let e = point["energy_ev"].as_f64().unwrap();
            let (eps1, eps2) = (
                point["eps1"].as_f64().unwrap(),
                point["eps2"].as_f64().unwrap(),
            );
            assert!(
                (m.eps1(e) - eps1).abs() < 1e-7 * eps1.abs().max(1.0),
                "{} E = {e}: ε1 {} vs scipy {eps1}",
                set["label"],
                m.eps1(e)
            );
            assert!((m.eps2(e) - eps2).abs() < 1e-12 * eps2.abs().max(1.0));
        }
    }
}

#[test]
fn drude_lorentz_limits() {
    // Free-electron gas without damping: ε = 1 − ωp²/ω² (Dressel & Grüner 2002, Drude model).
    // At ω = ωp/2, ε = −3: N = i√3 (n → 0, k = √3), total reflection of a metal below ωp.
    let plasma = DrudeLorentz::new(
        1.0,
        Some(DrudeTerm {
            plasma_ev: 9.0,
            gamma_ev: 1e-9,
        }),
        vec![],
        (100.0, 2000.0),
    )
    .unwrap();
    let wl = HC_EV_NM / 4.5;
    let n = Material::new("drude", "plasma", "model", Dispersion::DrudeLorentz(plasma))
        .index_at(wl)
        .unwrap();
    assert!(n.re < 1e-6 && (n.im - 3f64.sqrt()).abs() < 1e-6, "N = {n}");
    // Above the plasma energy the gas is transparent: ω = 2ωp gives ε = 3/4, N = √0.75.
    let plasma = DrudeLorentz::new(
        1.0,
        Some(DrudeTerm {
            plasma_ev: 9.0,
            gamma_ev: 0.0,
        }),
        vec![],
        (50.0, 2000.0),
    )
    .unwrap();
    let n = plasma.index(HC_EV_NM / 18.0);
    assert!((n.re - 0.75f64.sqrt()).abs() < 1e-12 && n.im == 0.0);
    // A Lorentz oscillator far below resonance adds its strength to the static ε:
    // ε(ω ≪ ω0) → ε∞ + f. Damping gives k > 0 with the e^{−iωt} convention.
    let osc = LorentzOscillator {
        strength: 2.0,
        e0_ev: 10.0,
        gamma_ev: 0.5,
    };
    let dl = DrudeLorentz::new(1.0, None, vec![osc], (100.0, 1e6)).unwrap();
    let eps = dl.eps(1e-3);
    assert!((eps.re - 3.0).abs() < 1e-6 && eps.im > 0.0);
    assert!(
        dl.index(HC_EV_NM / 10.0).im > 0.1,
        "absorbs at resonance, k ≥ 0"
    );
}

#[test]
fn cauchy_model_reproduces_rubin_glass_index() {
    // M. Rubin, Sol. Energy Mater. 12, 275 (1985), clear soda-lime glass:
    // n = 1.513 − 0.003169 λ² + 0.003962/λ² (λ in µm), valid 310–4600 nm. The built-in table
    // holds the refractiveindex.info evaluation of that formula at its k wavelengths.
    let model = Cauchy::new(
        1.513,
        vec![(-0.003169, 2.0), (0.003962, -2.0)],
        (310.0, 4600.0),
    )
    .unwrap();
    let table = material("glass-clear-rubin1985");
    for wl in [310.0, 500.0, 1000.0, 2000.0, 2600.0] {
        let tabulated = table.index_at(wl).unwrap().re;
        assert!(
            (model.n(wl) - tabulated).abs() < 2e-6,
            "{wl} nm: {} vs {tabulated}",
            model.n(wl)
        );
    }
    // Clear glass absorbs weakly (iron): k > 0 but α < 1 cm⁻¹ in the visible.
    let k = table.index_at(500.0).unwrap().im;
    assert!(k > 0.0 && absorption_coefficient_per_cm(k, 500.0) < 1.0);
}

#[test]
fn constant_materials_are_valid_everywhere() {
    let m = Material::constant("n2", num_complex::Complex64::new(2.0, 0.0));
    assert_eq!(m.index_at(1e-3).unwrap().re, 2.0);
    assert_eq!(m.index_at(1e7).unwrap().re, 2.0);
    assert!(!m.is_absorbing_anywhere());
}
