//! The built-in material library: `data/nk/*.csv` embedded at compile time, plus Sellmeier
//! models for the entries that the original publications give as formulas.
//!
//! Ids are lower case, `<material>[-<form>]-<first author><year>` (e.g. `si-green2008`,
//! `sio2-film-rodriguez2016`), and stable: scenarios store them. Short aliases (`si`, `sio2`,
//! …) resolve to a default entry; a material keeps its full id in results so the data used
//! are always named. Citations: data/nk/SOURCES.md and each file's header.

use super::csv;
use super::models::{Dispersion, Sellmeier};
use super::{Inner, Material};
use crate::optics::Index;
use std::path::Path;
use std::sync::{Arc, OnceLock};

/// How an entry's n, k are computed.
enum Data {
    /// The CSV table itself (linear interpolation).
    Table,
    /// A Sellmeier formula n² − 1 = c₁ + Σ Bλ²/(λ² − C²) (λ, C in µm) valid over a range in
    /// nm; the CSV holds the database's evaluation of the same formula (used in tests).
    Sellmeier {
        c1: f64,
        terms: &'static [(f64, f64)],
        range_nm: (f64, f64),
    },
}

struct Entry {
    id: &'static str,
    file: &'static str,
    text: &'static str,
    short: &'static str,
    data: Data,
}

macro_rules! nk {
    ($file:literal) => {
        ($file, include_str!(concat!("../../../data/nk/", $file)))
    };
}

fn entry(
    id: &'static str,
    file: (&'static str, &'static str),
    short: &'static str,
    data: Data,
) -> Entry {
    Entry {
        id,
        file: file.0,
        text: file.1,
        short,
        data,
    }
}

/// Every built-in entry except `air`; the library sorts them by id.
fn entries() -> Vec<Entry> {
    use Data::Table as T;
    vec![
        entry(
            "ag-johnson-christy1972",
            nk!("ag_johnson-christy1972.csv"),
            "Johnson & Christy, Phys. Rev. B 6, 4370 (1972)",
            T,
        ),
        entry(
            "ag-mcpeak2015",
            nk!("ag_mcpeak2015.csv"),
            "McPeak et al., ACS Photonics 2, 326 (2015)",
            T,
        ),
        entry(
            "al-mcpeak2015",
            nk!("al_mcpeak2015.csv"),
            "McPeak et al., ACS Photonics 2, 326 (2015)",
            T,
        ),
        entry(
            "al-rakic1995",
            nk!("al_rakic1995.csv"),
            "Rakić, Appl. Opt. 34, 4755 (1995)",
            T,
        ),
        entry(
            "al2o3-film-franta2015",
            nk!("al2o3_franta2015_film.csv"),
            "Franta et al., Proc. SPIE 9628, 96281U (2015)",
            T,
        ),
        entry(
            "al2o3-peald-rodriguez2025",
            nk!("al2o3_rodriguez-de-marcos_peald.csv"),
            "Rodríguez de Marcos et al., doi:10.1364/OME.562660 (citation to be checked)",
            T,
        ),
        // I. H. Malitson, J. Opt. Soc. Am. 52, 1377 (1962), ordinary ray, 24 °C; coefficients
        // as stored by refractiveindex.info (file header), valid 0.2652–5.577 µm.
        entry(
            "al2o3-sapphire-malitson1962",
            nk!("al2o3_malitson1962_sapphire-o.csv"),
            "Malitson, J. Opt. Soc. Am. 52, 1377 (1962)",
            Data::Sellmeier {
                c1: 0.0,
                terms: &[
                    (1.023_797_988_891_601_6, 0.061_448_208_987_712_86),
                    (1.058_264_017_105_102_5, 0.110_699_698_328_971_86),
                    (5.280_792_236_328_125, 17.926_559_448_242_188),
                ],
                range_nm: (265.2, 5577.0),
            },
        ),
        entry(
            "azo-treharne2011",
            nk!("azo_treharne2011.csv"),
            "Treharne et al., J. Phys. Conf. Ser. 286, 012038 (2011)",
            T,
        ),
        entry(
            "eva-uv-absorbing-vogt2016",
            nk!("eva_vogt2016_evasky-s88.csv"),
            "Vogt et al., Energy Procedia 92, 523 (2016)",
            T,
        ),
        entry(
            "eva-uv-transparent-vogt2016",
            nk!("eva_vogt2016_evasky-s87.csv"),
            "Vogt et al., Energy Procedia 92, 523 (2016)",
            T,
        ),
        entry(
            "glass-clear-703ppm-vogt2016",
            nk!("glass_soda-lime_vogt2016_703ppm.csv"),
            "Vogt et al., IEEE J. Photovolt. 6, 111 (2016)",
            T,
        ),
        entry(
            "glass-clear-rubin1985",
            nk!("glass_soda-lime_rubin1985_clear.csv"),
            "Rubin, Sol. Energy Mater. 12, 275 (1985)",
            T,
        ),
        entry(
            "glass-lowiron-5ppm-vogt2016",
            nk!("glass_soda-lime_vogt2016_5ppm.csv"),
            "Vogt et al., IEEE J. Photovolt. 6, 111 (2016)",
            T,
        ),
        entry(
            "glass-lowiron-rubin1985",
            nk!("glass_soda-lime_rubin1985_lowiron.csv"),
            "Rubin, Sol. Energy Mater. 12, 275 (1985)",
            T,
        ),
        entry(
            "ito-konig2014",
            nk!("ito_konig2014.csv"),
            "König et al., ACS Nano 8, 6182 (2014)",
            T,
        ),
        entry(
            "ito-minenkov2024",
            nk!("ito_minenkov2024.csv"),
            "Minenkov et al., ACS Appl. Mater. Interfaces 16, 9517 (2024)",
            T,
        ),
        entry(
            "mapbi3-ball2015",
            nk!("mapbi3_ball2015.csv"),
            "Ball et al., Energy Environ. Sci. 8, 602 (2015)",
            T,
        ),
        entry(
            "mapbi3-phillips2015",
            nk!("mapbi3_phillips2015.csv"),
            "Phillips et al., Data in Brief 5, 926 (2015)",
            T,
        ),
        // M. J. Dodge, Appl. Opt. 23, 1980 (1984), ordinary ray, 19 °C, valid 0.2–7.0 µm.
        entry(
            "mgf2-crystal-dodge1984",
            nk!("mgf2_dodge1984_o.csv"),
            "Dodge, Appl. Opt. 23, 1980 (1984)",
            Data::Sellmeier {
                c1: 0.0,
                terms: &[
                    (0.487_551_093_101_501_46, 0.043_384_078_890_085_22),
                    (0.398_750_305_175_781_25, 0.094_614_416_360_855_1),
                    (2.312_035_322_189_331, 23.793_603_897_094_727),
                ],
                range_nm: (200.0, 7000.0),
            },
        ),
        entry(
            "mgf2-film-rodriguez2017",
            nk!("mgf2_rodriguez-de-marcos2017_film.csv"),
            "Rodríguez-de Marcos et al., Opt. Mater. Express 7, 989 (2017)",
            T,
        ),
        entry(
            "si-green2008",
            nk!("si_green2008.csv"),
            "Green, Sol. Energy Mater. Sol. Cells 92, 1305 (2008)",
            T,
        ),
        entry(
            "si-schinke2015",
            nk!("si_schinke2015.csv"),
            "Schinke et al., AIP Advances 5, 067168 (2015)",
            T,
        ),
        // K. Luke et al., Opt. Lett. 40, 4823 (2015), valid 0.31–5.504 µm.
        entry(
            "si3n4-luke2015",
            nk!("si3n4_luke2015.csv"),
            "Luke et al., Opt. Lett. 40, 4823 (2015)",
            Data::Sellmeier {
                c1: 0.0,
                terms: &[
                    (3.024_899_959_564_209, 0.135_340_601_205_825_8),
                    (40_314.0, 1_239.842_041_015_625),
                ],
                range_nm: (310.0, 5504.0),
            },
        ),
        // H. R. Philipp, J. Electrochem. Soc. 120, 295 (1973), as a one-term Sellmeier by
        // T. Bååk, Appl. Opt. 21, 1069 (1982); valid 0.207–1.24 µm.
        entry(
            "si3n4-philipp1973",
            nk!("si3n4_philipp1973.csv"),
            "Philipp, J. Electrochem. Soc. 120, 295 (1973); formula Bååk, Appl. Opt. 21, 1069 (1982)",
            Data::Sellmeier {
                c1: 0.0,
                terms: &[(2.893_899_917_602_539, 0.139_669_999_480_247_5)],
                range_nm: (207.0, 1240.0),
            },
        ),
        entry(
            "sinx-beliaev2022",
            nk!("sinx_beliaev2022_pecvd.csv"),
            "Beliaev et al., Thin Solid Films 763, 139568 (2022)",
            T,
        ),
        entry(
            "sinx-n1.91-vogt2015",
            nk!("sinx_vogt2015_n1.91.csv"),
            "Vogt, PhD thesis (2015)",
            T,
        ),
        entry(
            "sinx-n2.09-vogt2015",
            nk!("sinx_vogt2015_n2.09.csv"),
            "Vogt, PhD thesis (2015)",
            T,
        ),
        entry(
            "sinx-n2.13-vogt2015",
            nk!("sinx_vogt2015_n2.13.csv"),
            "Vogt, PhD thesis (2015)",
            T,
        ),
        entry(
            "sio2-film-rodriguez2016",
            nk!("sio2_rodriguez-de-marcos2016_film.csv"),
            "Rodríguez-de Marcos et al., Opt. Mater. Express 6, 3622 (2016)",
            T,
        ),
        // I. H. Malitson, J. Opt. Soc. Am. 55, 1205 (1965), fused silica at 20 °C: the
        // three-term Sellmeier with the coefficients printed in the paper (B = 0.6961663,
        // 0.4079426, 0.8974794; λ_j = 0.0684043, 0.1162414, 9.896161 µm), stated there for
        // 0.21–3.71 µm.
        entry(
            "sio2-malitson1965",
            nk!("sio2_malitson1965.csv"),
            "Malitson, J. Opt. Soc. Am. 55, 1205 (1965)",
            Data::Sellmeier {
                c1: 0.0,
                terms: &[
                    (0.696_166_3, 0.068_404_3),
                    (0.407_942_6, 0.116_241_4),
                    (0.897_479_4, 9.896_161),
                ],
                range_nm: (210.0, 3710.0),
            },
        ),
        entry(
            "tio2-ald-siefke2016",
            nk!("tio2_siefke2016_ald.csv"),
            "Siefke et al., Adv. Opt. Mater. 4, 1780 (2016)",
            T,
        ),
        entry(
            "tio2-film-sarkar2019",
            nk!("tio2_sarkar2019_film.csv"),
            "Sarkar et al., ACS Appl. Mater. Interfaces 11, 13752 (2019)",
            T,
        ),
        // J. R. Devore, J. Opt. Soc. Am. 41, 416 (1951), ordinary ray: n² = 5.913 +
        // 0.2441/(λ² − 0.0803), λ in µm, valid 0.43–1.53 µm. Rewritten exactly in Sellmeier
        // form: B/(λ² − C) = (B/C)·λ²/(λ² − C) − B/C, so c₁ = 5.913 − 1 − B/C, B' = B/C,
        // C' = √C.
        entry(
            "tio2-rutile-devore1951",
            nk!("tio2_devore1951_rutile-o.csv"),
            "Devore, J. Opt. Soc. Am. 41, 416 (1951)",
            Data::Sellmeier {
                c1: DEVORE_C1,
                terms: &[(DEVORE_B, DEVORE_C)],
                range_nm: (430.0, 1530.0),
            },
        ),
        entry(
            "zno-film-stelling2017",
            nk!("zno_stelling2017_film.csv"),
            "Stelling et al., Sci. Rep. 7, 42530 (2017)",
            T,
        ),
    ]
}

// Devore (1951) constants in the Sellmeier form (see the entry above).
const DEVORE_A: f64 = 5.913;
const DEVORE_B_RAW: f64 = 0.2441;
const DEVORE_C_RAW: f64 = 0.0803;
const DEVORE_B: f64 = DEVORE_B_RAW / DEVORE_C_RAW;
const DEVORE_C1: f64 = DEVORE_A - 1.0 - DEVORE_B;
// √0.0803, to f64 precision (checked in the tests).
const DEVORE_C: f64 = 0.283_372_546_306_095_1;

/// Short aliases → full ids. Each alias names the entry a cell engineer most likely means.
pub const ALIASES: &[(&str, &str)] = &[
    ("ag", "ag-mcpeak2015"),
    ("al", "al-mcpeak2015"),
    ("al2o3", "al2o3-film-franta2015"),
    ("azo", "azo-treharne2011"),
    ("ito", "ito-minenkov2024"),
    ("mapbi3", "mapbi3-phillips2015"),
    ("mgf2", "mgf2-film-rodriguez2017"),
    ("si", "si-green2008"),
    ("si3n4", "si3n4-luke2015"),
    ("sio2", "sio2-malitson1965"),
    ("tio2", "tio2-ald-siefke2016"),
    ("zno", "zno-film-stelling2017"),
];

/// The built-in library, sorted by id, built once on first use.
pub(crate) fn library() -> &'static [Material] {
    static LIBRARY: OnceLock<Vec<Material>> = OnceLock::new();
    LIBRARY.get_or_init(build)
}

fn build() -> Vec<Material> {
    let mut all: Vec<Material> = entries().into_iter().map(load).collect();
    all.push(Material(Arc::new(Inner {
        id: "air".into(),
        name: "air (taken as N = 1)".into(),
        source: "N = 1 exactly; air at room conditions has n − 1 ≈ 2.7e-4 in the visible \
                 (from memory), neglected (common practice)"
            .into(),
        short_source: "N = 1 (common practice)".into(),
        model: Dispersion::Constant(Index::new(1.0, 0.0)),
    })));
    all.sort_by(|a, b| a.id().cmp(b.id()));
    all
}

/// Build one entry. The embedded files are part of the program and checked by the tests,
/// so a failure here is a bug in lightfold, not bad input.
fn load(e: Entry) -> Material {
    let path = Path::new("data/nk").join(e.file);
    let parsed = csv::parse(e.text, &path)
        .unwrap_or_else(|err| panic!("built-in material `{}` is corrupt: {err}", e.id));
    let model = match e.data {
        Data::Table => Dispersion::Tabulated(parsed.table),
        Data::Sellmeier {
            c1,
            terms,
            range_nm,
        } => Dispersion::Sellmeier(
            Sellmeier::new(c1, terms.to_vec(), range_nm)
                .unwrap_or_else(|err| panic!("built-in material `{}` is corrupt: {err}", e.id)),
        ),
    };
    Material(Arc::new(Inner {
        id: e.id.into(),
        name: parsed.name.unwrap_or_else(|| e.id.to_string()),
        source: parsed.reference.unwrap_or_else(|| e.short.to_string()),
        short_source: e.short.into(),
        model,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn devore_square_root_constant_is_exact() {
        assert!((DEVORE_C * DEVORE_C - DEVORE_C_RAW).abs() < 1e-16);
    }

    /// Each formula entry against the database's own evaluation of the same formula (the
    /// CSV beside it, exported from refractiveindex.info; data/nk/SOURCES.md).
    #[test]
    fn formula_entries_match_the_database_evaluation() {
        let mut checked = 0;
        for e in entries() {
            if let Data::Table = e.data {
                continue;
            }
            let (id, file) = (e.id, e.file);
            let parsed = csv::parse(e.text, Path::new(file)).unwrap();
            let m = load(e);
            for (wl, n, _) in parsed.table.rows() {
                if let Ok(ours) = m.index_at(wl) {
                    checked += 1;
                    assert!(
                        (ours.re - n).abs() < 2e-6,
                        "{id} at {wl} nm: {} vs database {n}",
                        ours.re
                    );
                }
            }
        }
        assert!(checked > 1500, "only {checked} points compared");
    }

    #[test]
    fn aliases_point_at_library_ids() {
        for (alias, id) in ALIASES {
            assert!(
                library().iter().any(|m| m.id() == *id),
                "alias {alias} → missing {id}"
            );
            assert!(
                library().iter().all(|m| m.id() != *alias),
                "alias {alias} shadows an id"
            );
        }
    }
}
