//! Where a texture named in a scenario (`texture = "random-pyramids-3um"`) comes from.
//!
//! A name without `/`, `\` or a `.toml` extension is a geometry of the project: the file
//! `geometries/<name>.toml`, searched in this order:
//! 1. the `geometries/` folder next to the scenario file, then in each folder above it (the
//!    nearest one that has the file wins), so scenarios anywhere in a project find it;
//! 2. the `geometries/` folder of the lightfold source tree this program was built from;
//! 3. the copies of `geometries/*.toml` built into the program ([`EMBEDDED_GEOMETRIES`]), so
//!    an installed binary works anywhere. The height-map image is not built in: the
//!    `height-map-bumps` texture needs the source tree or a project copy of its PNG.

use std::path::{Path, PathBuf};

/// The geometry files built into the program: (name, TOML text). A test checks that this
/// list matches `geometries/*.toml` exactly.
pub const EMBEDDED_GEOMETRIES: &[(&str, &str)] = &[
    (
        "height-map-bumps",
        include_str!("../../geometries/height-map-bumps.toml"),
    ),
    (
        "ideal-lambertian",
        include_str!("../../geometries/ideal-lambertian.toml"),
    ),
    (
        "ideal-specular",
        include_str!("../../geometries/ideal-specular.toml"),
    ),
    (
        "inverted-pyramids-10um",
        include_str!("../../geometries/inverted-pyramids-10um.toml"),
    ),
    ("planar", include_str!("../../geometries/planar.toml")),
    (
        "random-pyramids-1um",
        include_str!("../../geometries/random-pyramids-1um.toml"),
    ),
    (
        "random-pyramids-3um",
        include_str!("../../geometries/random-pyramids-3um.toml"),
    ),
    (
        "random-pyramids-5um",
        include_str!("../../geometries/random-pyramids-5um.toml"),
    ),
    (
        "upright-pyramids-10um",
        include_str!("../../geometries/upright-pyramids-10um.toml"),
    ),
    (
        "v-grooves-10um",
        include_str!("../../geometries/v-grooves-10um.toml"),
    ),
];

/// Where a named geometry was found.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum GeometrySource {
    /// A file on disk.
    File(PathBuf),
    /// A built-in copy: (name, TOML text).
    Embedded(&'static str, &'static str),
}

/// Folders searched for `<name>.toml`, in order (see the module doc); `base` is the scenario's
/// folder (`None` for embedded scenarios, which see only the built-in copies).
fn search_dirs(base: Option<&Path>) -> Vec<PathBuf> {
    let mut dirs: Vec<PathBuf> = Vec::new();
    if let Some(base) = base {
        let start = if base.as_os_str().is_empty() {
            Path::new(".")
        } else {
            base
        };
        let start = start.canonicalize().unwrap_or_else(|_| start.to_path_buf());
        dirs.extend(start.ancestors().map(|a| a.join("geometries")));
        dirs.push(Path::new(env!("CARGO_MANIFEST_DIR")).join("geometries"));
    }
    dirs
}

/// Whether a texture reference names a file path rather than a geometry name.
pub(crate) fn is_path(reference: &str) -> bool {
    reference.contains('/')
        || reference.contains('\\')
        || reference.to_ascii_lowercase().ends_with(".toml")
}

/// Finds the geometry `name` (see the module doc). `Err` carries every known geometry name
/// (for suggestions).
pub fn find_geometry(name: &str, base: Option<&Path>) -> Result<GeometrySource, Vec<String>> {
    for dir in search_dirs(base) {
        let path = dir.join(format!("{name}.toml"));
        if path.is_file() {
            return Ok(GeometrySource::File(path));
        }
    }
    if let Some((n, text)) = EMBEDDED_GEOMETRIES.iter().find(|(n, _)| *n == name) {
        return Ok(GeometrySource::Embedded(n, text));
    }
    Err(known_geometries(base))
}

/// Every geometry name visible from a scenario in `base`, sorted, without duplicates.
pub fn known_geometries(base: Option<&Path>) -> Vec<String> {
    let mut names: Vec<String> = EMBEDDED_GEOMETRIES
        .iter()
        .map(|(n, _)| n.to_string())
        .collect();
    for dir in search_dirs(base) {
        let Ok(read) = std::fs::read_dir(&dir) else {
            continue;
        };
        for entry in read.flatten() {
            let p = entry.path();
            if p.extension().is_some_and(|e| e == "toml")
                && let Some(stem) = p.file_stem()
            {
                names.push(stem.to_string_lossy().into_owned());
            }
        }
    }
    names.sort();
    names.dedup();
    names
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn embedded_list_matches_the_geometries_folder() {
        let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("geometries");
        let mut on_disk: Vec<(String, String)> = std::fs::read_dir(&dir)
            .unwrap()
            .flatten()
            .map(|e| e.path())
            .filter(|p| p.extension().is_some_and(|e| e == "toml"))
            .map(|p| {
                (
                    p.file_stem().unwrap().to_string_lossy().into_owned(),
                    std::fs::read_to_string(&p).unwrap(),
                )
            })
            .collect();
        on_disk.sort();
        let embedded: Vec<(String, String)> = EMBEDDED_GEOMETRIES
            .iter()
            .map(|(n, t)| (n.to_string(), t.to_string()))
            .collect();
        assert_eq!(
            embedded, on_disk,
            "add new geometry files to EMBEDDED_GEOMETRIES"
        );
    }

    #[test]
    fn embedded_scenarios_see_only_built_in_geometries() {
        assert_eq!(
            find_geometry("planar", None).unwrap(),
            GeometrySource::Embedded("planar", EMBEDDED_GEOMETRIES[4].1)
        );
        let known = find_geometry("no-such-texture", None).unwrap_err();
        assert!(known.contains(&"random-pyramids-3um".to_string()));
    }

    #[test]
    fn files_are_found_from_a_folder_below_the_project() {
        let base = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
        match find_geometry("random-pyramids-3um", Some(&base)).unwrap() {
            GeometrySource::File(p) => assert!(p.ends_with("geometries/random-pyramids-3um.toml")),
            other => panic!("expected the project file, got {other:?}"),
        }
    }
}
