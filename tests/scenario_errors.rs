//! Bad scenario input, one class per test: each problem is reported with file:line:column,
//! what was expected and a fix, all problems in one pass, sorted by position. Positions are
//! found independently here by searching the text. Geometric fact used: regular upright
//! pyramids with {111} facets (atan √2 = 54.7356° on (100) Si) of base b are b·√2/2 tall
//! (common practice, no source beyond the cube's geometry). Material ranges: M. A. Green,
//! Sol. Energy Mater. Sol. Cells 92, 1305 (2008) tabulates Si from 250 to 1450 nm.

use lightfold::scenario::{Problem, Scenario, ScenarioError};
use std::path::{Path, PathBuf};

/// A valid scenario; tests replace parts of it.
const BASE: &str = r#"name = "t"
[light]
wavelengths_nm = "400:1100:100"

[[stack]]
kind = "interface"
name = "front"
texture = "planar"

[[stack]]
kind = "layer"
name = "wafer"
material = "si"
thickness_um = 150

[[stack]]
kind = "interface"
name = "rear"
texture = "planar"
"#;

struct Case {
    _dir: tempfile::TempDir,
    path: PathBuf,
    text: String,
}

fn case(text: &str) -> Case {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("scenario.toml");
    std::fs::write(&path, text).unwrap();
    Case {
        _dir: dir,
        path,
        text: text.to_string(),
    }
}

impl Case {
    fn dir(&self) -> &Path {
        self.path.parent().unwrap()
    }
    fn problems(&self) -> Vec<Problem> {
        match Scenario::from_file(&self.path) {
            Ok(_) => panic!("scenario accepted:\n{}", self.text),
            Err(e @ ScenarioError::Invalid { .. }) => {
                let all = e.problems().to_vec();
                let shown = e.to_string();
                for p in &all {
                    assert!(shown.contains(&p.problem), "Display lists every problem");
                }
                all
            }
            Err(other) => panic!("unexpected error kind: {other}"),
        }
    }
    /// 1-based (line, column) of the `nth` occurrence of `needle` (+ `offset` characters).
    fn at(&self, needle: &str, nth: usize, offset: usize) -> (usize, usize) {
        let mut from = 0;
        let mut idx = 0;
        for _ in 0..=nth {
            idx = from + self.text[from..].find(needle).expect("needle in text");
            from = idx + 1;
        }
        let before = &self.text[..idx];
        let line = before.matches('\n').count() + 1;
        let col = before.rsplit('\n').next().unwrap().chars().count() + 1 + offset;
        (line, col)
    }
}

/// The single problem whose text contains `what`.
fn one(problems: &[Problem], what: &str) -> Problem {
    let found: Vec<&Problem> = problems
        .iter()
        .filter(|p| p.problem.contains(what))
        .collect();
    assert_eq!(found.len(), 1, "one problem with `{what}` in {problems:#?}");
    found[0].clone()
}

fn pos(p: &Problem) -> (usize, usize) {
    (p.line, p.col)
}

#[test]
fn base_scenario_is_valid() {
    let c = case(BASE);
    let s = Scenario::from_file(&c.path).unwrap();
    assert_eq!(s.absorber_layer().name, "wafer");
}

#[test]
fn malformed_toml_gives_the_position_of_the_syntax_error() {
    let c = case("name = \"t\"\n[light\nspectrum = \"am1.5g\"\n");
    let ps = c.problems();
    assert_eq!(ps.len(), 1);
    assert!(ps[0].problem.starts_with("not valid TOML"), "{ps:?}");
    assert_eq!(ps[0].line, 2);
    assert!(ps[0].col > 1);
    let shown = ps[0].to_string();
    assert!(
        shown.starts_with(&format!("{}:2:", c.path.display())),
        "{shown}"
    );
    assert!(shown.contains("\n  expected: ") && shown.contains("\n  fix: "));
}

#[test]
fn unknown_keys_get_a_did_you_mean_at_every_level() {
    let text = BASE
        .replace("[light]\n", "[light]\npolar_angel_deg = 5\n")
        .replace("name = \"t\"\n", "name = \"t\"\ndescripton = \"x\"\n")
        .replace("thickness_um = 150", "thickness_um = 150\nabsorbr = true")
        .replace(
            "name = \"front\"\ntexture = \"planar\"",
            "name = \"front\"\ntexture = \"planar\"\ncoating = [{ material = \"sio2\", thikness_nm = 5, thickness_nm = 5 }]",
        );
    let c = case(&text);
    let ps = c.problems();
    let p = one(&ps, "`polar_angel_deg`");
    assert_eq!(pos(&p), c.at("polar_angel_deg", 0, 0));
    assert_eq!(p.fix, "did you mean `polar_angle_deg`?");
    assert!(p.expected.contains("polar_angle_deg") && p.expected.contains("weighting_band_nm"));
    assert_eq!(one(&ps, "`descripton`").fix, "did you mean `description`?");
    assert_eq!(one(&ps, "`absorbr`").fix, "did you mean `absorber`?");
    let film = one(&ps, "`thikness_nm`");
    assert_eq!(pos(&film), c.at("thikness_nm", 0, 0));
    assert_eq!(film.fix, "did you mean `thickness_nm`?");
    assert_eq!(ps.len(), 4, "{ps:#?}");
}

#[test]
fn a_key_of_the_other_element_kind_says_where_it_belongs() {
    let c = case(&BASE.replace(
        "thickness_um = 150",
        "thickness_um = 150\ntexture = \"planar\"",
    ));
    let ps = c.problems();
    let p = one(&ps, "unknown key `texture`");
    assert!(p.fix.contains("belongs to interfaces"), "{p:?}");
}

#[test]
fn missing_keys_are_reported_at_their_table() {
    let c = case(
        &BASE
            .replace("thickness_um = 150\n", "")
            .replace("texture = \"planar\"\n\n", ""),
    );
    let ps = c.problems();
    let t = one(&ps, "missing key `thickness_um`");
    assert_eq!(pos(&t), c.at("[[stack]]", 1, 0));
    assert!(t.fix.contains("thickness_um = "), "{t:?}");
    let tex = one(&ps, "missing key `texture`");
    assert_eq!(pos(&tex), c.at("[[stack]]", 0, 0));
    let k = case(&BASE.replace("kind = \"layer\"\n", ""));
    let kp = k.problems();
    let p = one(&kp, "missing key `kind`");
    assert_eq!(
        p.fix, "add `kind = \"layer\"`",
        "guessed from the keys present"
    );
}

#[test]
fn wrong_types_name_the_type_and_show_the_form() {
    let text = BASE
        .replace("thickness_um = 150", "thickness_um = \"150\"")
        .replace(
            "wavelengths_nm = \"400:1100:100\"",
            "wavelengths_nm = \"400:1100:100\"\npolar_angle_deg = \"8\"",
        );
    let c = case(&(text + "[output]\nplots = \"yes\"\n[solver]\nseed = 1.5\n"));
    let ps = c.problems();
    let p = one(&ps, "`thickness_um`");
    assert!(p.problem.contains("is a string"), "{p:?}");
    assert_eq!(pos(&p), c.at("\"150\"", 0, 0));
    assert_eq!(p.fix, "write e.g. `thickness_um = 160`");
    assert!(
        one(&ps, "`polar_angle_deg`")
            .problem
            .contains("is a string")
    );
    assert!(one(&ps, "`plots`").expected.contains("true or false"));
    assert!(one(&ps, "`seed`").problem.contains("not a whole number"));
    // `[stack]` for one element among `[[stack]]` ones is a TOML error; the fix says why.
    let s = case(&BASE.replacen("[[stack]]", "[stack]", 1));
    let sp = s.problems();
    assert_eq!(sp.len(), 1);
    assert!(sp[0].fix.contains("[[stack]]"), "{sp:#?}");
}

#[test]
fn out_of_range_values_are_rejected_with_the_range() {
    let text = BASE
        .replace("thickness_um = 150", "thickness_um = -20")
        .replace(
            "name = \"rear\"\ntexture = \"planar\"",
            "name = \"rear\"\ntexture = { kind = \"regular-pyramids\", base_um = 10, base_angle_deg = 95 }\ncoating = [{ material = \"sio2\", thickness_nm = 0 }]",
        )
        .replace("[light]\n", "[light]\npolar_angle_deg = 90\n");
    let c = case(&(text + "[solver]\nrays = 0\n"));
    let ps = c.problems();
    let facet = one(&ps, "`base_angle_deg` = 95");
    assert_eq!(pos(&facet), c.at("95", 0, 0));
    assert!(facet.expected.contains("between 0° and 90°"));
    let thick = one(&ps, "`thickness_um`");
    assert_eq!(pos(&thick), c.at("-20", 0, 0));
    assert!(thick.expected.contains("0 < d"));
    let film = one(&ps, "`thickness_nm`");
    assert!(film.fix.contains("remove the film"), "{film:?}");
    let rays = one(&ps, "`rays`");
    assert_eq!(pos(&rays), c.at("rays = 0", 0, 7));
    assert!(rays.expected.contains("≥ 1"));
    assert!(one(&ps, "`polar_angle_deg`").expected.contains("θ < 90°"));
}

#[test]
fn wavelengths_outside_a_materials_data_name_material_range_and_wavelength() {
    let text = BASE.replace("\"400:1100:100\"", "\"200:1600:100\"");
    let c = case(&(text + "[below]\nmaterial = \"ag\"\n"));
    let ps = c.problems();
    let si = one(&ps, "`si-green2008`");
    assert_eq!(pos(&si), c.at("\"si\"", 0, 0));
    assert!(si.problem.contains("200 nm"), "{si:?}");
    assert!(
        si.problem.contains("250–1450 nm"),
        "Green (2008) covers 250–1450 nm: {si:?}"
    );
    assert!(si.fix.contains("250–1450 nm"), "{si:?}");
    let ag = one(&ps, "`ag-mcpeak2015`");
    assert_eq!(pos(&ag), c.at("\"ag\"", 0, 0));
}

#[test]
fn missing_geometry_and_spectrum_files_are_reported_where_named() {
    let text = BASE
        .replacen(
            "texture = \"planar\"",
            "texture = \"random-pyramids-3mu\"",
            1,
        )
        .replace(
            "name = \"rear\"\ntexture = \"planar\"",
            "name = \"rear\"\ntexture = \"textures/none.toml\"",
        )
        .replace("[light]\n", "[light]\nspectrum = \"spectra/missing.csv\"\n");
    let c = case(&text);
    let ps = c.problems();
    let g = one(&ps, "random-pyramids-3mu");
    assert_eq!(pos(&g), c.at("\"random-pyramids-3mu\"", 0, 0));
    assert_eq!(g.fix, "did you mean \"random-pyramids-3um\"?");
    let f = one(&ps, "textures/none.toml");
    assert!(f.problem.starts_with("cannot read texture file"), "{f:?}");
    let s = one(&ps, "spectra/missing.csv");
    assert!(s.problem.starts_with("cannot read spectrum file"), "{s:?}");
    assert_eq!(pos(&s), c.at("\"spectra/missing.csv\"", 0, 0));
    let u = case(&BASE.replace("[light]\n", "[light]\nspectrum = \"am1.5\"\n"));
    assert_eq!(
        one(&u.problems(), "unknown spectrum").fix,
        "did you mean \"am1.5g\"?"
    );
}

#[test]
fn problems_inside_referenced_files_keep_their_own_file_and_line() {
    let text = BASE
        .replacen("texture = \"planar\"", "texture = \"bad-texture.toml\"", 1)
        .replace("[light]\n", "[light]\nspectrum = \"sun.csv\"\n");
    let c = case(&text);
    std::fs::write(
        c.dir().join("bad-texture.toml"),
        "kind = \"regular-pyramids\"\n# comment\nbase_um = -3\n",
    )
    .unwrap();
    std::fs::write(
        c.dir().join("sun.csv"),
        "wavelength_nm,irradiance_W_m2_nm\n400,1.0\n300,1.2\n",
    )
    .unwrap();
    let ps = c.problems();
    let t = one(&ps, "`base_um`");
    assert!(t.file.ends_with("bad-texture.toml"), "{t:?}");
    assert_eq!((t.line, t.col), (3, 11));
    let s = one(&ps, "spectrum file");
    assert!(s.file.ends_with("sun.csv"), "{s:?}");
    assert_eq!(s.line, 3);
    // Listed where the scenario names them: the spectrum (line 3) before the texture (line 8).
    let order: Vec<bool> = ps.iter().map(|p| p.file.ends_with("sun.csv")).collect();
    assert_eq!(order, [true, false], "{ps:#?}");
}

#[test]
fn non_physical_stacks_are_explained() {
    // Starts with a layer and ends with one.
    let c = case(
        "[[stack]]\nkind = \"layer\"\nname = \"a\"\nmaterial = \"si\"\nthickness_um = 100\n\
         [[stack]]\nkind = \"interface\"\ntexture = \"planar\"\n\
         [[stack]]\nkind = \"layer\"\nname = \"b\"\nmaterial = \"si\"\nthickness_um = 100\n",
    );
    let ps = c.problems();
    assert_eq!(
        pos(&one(&ps, "starts with thick layer `a`")),
        c.at("\"layer\"", 0, 0)
    );
    assert_eq!(
        pos(&one(&ps, "ends with thick layer `b`")),
        c.at("\"layer\"", 1, 0)
    );
    // Interface next to interface; two layers without an interface.
    let text = BASE.replace(
        "[[stack]]\nkind = \"interface\"\nname = \"rear\"",
        "[[stack]]\nkind = \"interface\"\nname = \"mid\"\ntexture = \"planar\"\n\
         [[stack]]\nkind = \"layer\"\nname = \"wafer2\"\nmaterial = \"si\"\nthickness_um = 1\n\
         [[stack]]\nkind = \"layer\"\nname = \"glass\"\nmaterial = \"sio2\"\nthickness_um = 1\n\
         [[stack]]\nkind = \"interface\"\nname = \"x\"\ntexture = \"planar\"\n\
         [[stack]]\nkind = \"interface\"\nname = \"rear\"",
    );
    let c = case(&text);
    let ps = c.problems();
    let two_layers = one(&ps, "thick layers `wafer2` and `glass`");
    assert_eq!(pos(&two_layers), c.at("kind = \"layer\"", 2, 7));
    let two_faces = one(&ps, "interfaces `x` and `rear`");
    assert!(two_faces.fix.contains("merge them"), "{two_faces:?}");
    // No absorber.
    let c = case(&BASE.replace("material = \"si\"", "material = \"sio2\""));
    let p = one(&c.problems(), "no absorber");
    assert!(p.fix.contains("absorber = true"));
    // Two absorbers.
    let text = BASE.replace(
        "[[stack]]\nkind = \"interface\"\nname = \"rear\"",
        "absorber = true\n[[stack]]\nkind = \"interface\"\nname = \"mid\"\ntexture = \"planar\"\n\
         [[stack]]\nkind = \"layer\"\nname = \"w2\"\nmaterial = \"si\"\nthickness_um = 9\nabsorber = true\n\
         [[stack]]\nkind = \"interface\"\nname = \"rear\"",
    );
    let c = case(&text);
    assert_eq!(
        pos(&one(&c.problems(), "both marked")),
        c.at("absorber = true", 1, 11)
    );
    // No layer at all.
    let c = case("[[stack]]\nkind = \"interface\"\ntexture = \"planar\"\n");
    one(&c.problems(), "no thick layer");
}

#[test]
fn too_many_coating_films_are_refused() {
    let films: Vec<String> = (0..=lightfold::tracer::MAX_FILM_LAYERS)
        .map(|_| "{ material = \"sio2\", thickness_nm = 10 }".to_string())
        .collect();
    let text = BASE.replacen(
        "texture = \"planar\"",
        &format!("texture = \"planar\"\ncoating = [{}]", films.join(", ")),
        1,
    );
    let c = case(&text);
    let ps = c.problems();
    let p = one(&ps, "13 films");
    assert_eq!(pos(&p), c.at("[{", 0, 0));
    assert!(p.expected.contains("at most 12"));
}

#[test]
fn textures_taller_than_their_layer_are_refused() {
    // Upright {111} pyramids of 10 µm base: 10/2·√2 = 7.071 µm tall. Pointing up from the rear
    // face into a 5 µm layer they do not fit; pointing down (the default below the absorber)
    // they do.
    let mut text = BASE
        .replace("thickness_um = 150", "thickness_um = 5")
        .replace(
            "name = \"rear\"\ntexture = \"planar\"",
            "name = \"rear\"\ntexture = \"upright-pyramids-10um\"\nfeatures = \"up\"",
        );
    let c = case(&text);
    let ps = c.problems();
    let p = one(&ps, "layer `wafer` is 5 µm thick");
    assert_eq!(pos(&p), c.at("thickness_um = 5", 0, 15));
    assert!(p.problem.contains("7.071 µm"), "√2·5 µm: {p:?}");
    text = text.replace("features = \"up\"", "");
    let ok = case(&text);
    let s = Scenario::from_file(&ok.path).unwrap();
    let rear = s.interfaces().last().unwrap();
    // The file gives the angle as 54.7356° (4 decimals): heights agree to ~1e-5 µm.
    assert!((rear.texture.z_range_um()[0] + 5.0 * 2f64.sqrt()).abs() < 1e-4);
}

#[test]
fn every_problem_is_reported_in_one_pass_sorted_by_position() {
    let text = "[solver]\nrays = 0\n\n[light]\npolar_angle_deg = -1\n\n\
                [[stack]]\nkind = \"interface\"\ntexture = \"planr\"\n\
                [[stack]]\nkind = \"layer\"\nmaterial = \"si\"\nthickness_um = 0\n\
                [[stack]]\nkind = \"interface\"\ntexture = \"planar\"\ncolor = 1\n";
    let c = case(text);
    let ps = c.problems();
    assert_eq!(ps.len(), 5, "{ps:#?}");
    let positions: Vec<(usize, usize)> = ps.iter().map(pos).collect();
    let mut sorted = positions.clone();
    sorted.sort();
    assert_eq!(positions, sorted);
    assert_eq!(
        positions[0].0, 2,
        "the solver's problem comes first: it is on line 2"
    );
    let shown = Scenario::from_file(&c.path).unwrap_err().to_string();
    assert!(
        shown.starts_with(&format!("{}: 5 problems", c.path.display())),
        "{shown}"
    );
}

#[test]
fn inconsistent_solver_and_light_settings() {
    let c = case(
        &(BASE.replace("[light]\n", "[light]\npolarisation = \"s\"\n")
            + "[solver]\npolarisation = \"unpolarised\"\nrays = 10\ntarget_std_error = 0.01\n"),
    );
    let ps = c.problems();
    one(&ps, "discards the polarised light");
    one(&ps, "both `rays` and `target_std_error`");
    let c = case(&(BASE.to_string() + "[solver]\nmax_rays = 10\n"));
    one(&c.problems(), "applies only with `target_std_error`");
    let c = case(&BASE.replace("[light]\n", "[light]\nweighting_band_nm = [300, 1200]\n"));
    let p = one(&c.problems(), "outside the simulated wavelengths");
    assert!(p.fix.contains("[400, 1100]"), "{p:?}");
}

#[test]
fn the_medium_above_must_be_transparent_and_names_unique() {
    let c = case(&(BASE.to_string() + "[above]\nmaterial = \"ag\"\n"));
    one(&c.problems(), "absorbs");
    let c = case(&BASE.replace("name = \"rear\"", "name = \"front\""));
    let p = one(&c.problems(), "two stack elements are named \"front\"");
    assert!(p.problem.contains("line 7"), "{p:?}");
    let c = case(&BASE.replace("name = \"wafer\"", "name = \"wafer.1\""));
    one(&c.problems(), "cannot be used in keys");
}
