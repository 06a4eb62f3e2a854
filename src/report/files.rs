//! Files that are either complete or absent: atomic writes and the results folder.
//!
//! Invariant: a write that fails leaves the previous file (if any) untouched and no
//! temporary file behind. Method: write to a fresh temporary file in the target's folder,
//! flush it to disk (`fsync`), then rename it over the target; a rename within one folder is
//! atomic on POSIX file systems (IEEE Std 1003.1, `rename()`), so readers see the old file
//! or the new one, never a mixture. Common practice, no further source.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Write};
use std::path::{Component, Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use super::ReportError;
use super::plot::Plot;

/// Counter that makes temporary names unique within this process.
static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// Writes `bytes` to `path` atomically: the file at `path` afterwards holds either its old
/// content (on any error) or exactly `bytes`.
///
/// The folder of `path` must exist. The temporary file lives in the same folder (a rename
/// across file systems would not be atomic) and is removed on failure.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> io::Result<()> {
    write_atomic_with(path, |w| w.write_all(bytes))
}

/// Like [`write_atomic`], but the content is produced by `fill`, which writes into the
/// temporary file (useful for large arrays that should not be built in memory first).
///
/// If `fill` returns an error, the temporary file is deleted, the target is left as it was
/// and that error is returned.
pub fn write_atomic_with<F>(path: &Path, fill: F) -> io::Result<()>
where
    F: FnOnce(&mut dyn Write) -> io::Result<()>,
{
    let file_name = path.file_name().ok_or_else(|| {
        io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("{}: not a file path (no file name)", path.display()),
        )
    })?;
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };

    // Create a temporary file that did not exist before (never clobber a stranger's file).
    let (tmp_path, file) = loop {
        let n = TEMP_COUNTER.fetch_add(1, Ordering::Relaxed);
        let mut name = std::ffi::OsString::from(".");
        name.push(file_name);
        name.push(format!(".tmp-{}-{n}", std::process::id()));
        let candidate = dir.join(name);
        match OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&candidate)
        {
            Ok(f) => break (candidate, f),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(e),
        }
    };

    // Fill, flush to disk, rename; on any failure remove the temporary file.
    let result = (|| {
        let mut writer = io::BufWriter::new(file);
        fill(&mut writer)?;
        let file = writer.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        drop(file);
        fs::rename(&tmp_path, path)
    })();
    if let Err(e) = result {
        let _ = fs::remove_file(&tmp_path);
        return Err(e);
    }

    // Make the rename itself durable. Best effort: some file systems refuse to sync a folder.
    #[cfg(unix)]
    if let Ok(d) = File::open(&dir) {
        let _ = d.sync_all();
    }
    Ok(())
}

/// A results folder: created (or reused with `force`), every file written atomically.
///
/// With `force`, files of the same name are replaced; other files already in the folder are
/// left alone (lightfold never deletes what it did not write in this run).
#[derive(Debug, Clone)]
pub struct ResultsDir {
    root: PathBuf,
}

impl ResultsDir {
    /// Creates the folder `path` (and its parents) for a new set of results.
    ///
    /// Refuses with [`ReportError::FolderNotEmpty`] if `path` is an existing folder with
    /// anything in it, unless `force` is set; refuses with [`ReportError::NotAFolder`] if
    /// `path` exists and is not a folder.
    pub fn create(path: &Path, force: bool) -> Result<Self, ReportError> {
        match fs::metadata(path) {
            Ok(meta) if !meta.is_dir() => {
                return Err(ReportError::NotAFolder {
                    path: path.to_path_buf(),
                });
            }
            Ok(_) => {
                let mut entries = fs::read_dir(path).map_err(|source| ReportError::Io {
                    path: path.to_path_buf(),
                    action: "list the folder",
                    source,
                })?;
                if entries.next().is_some() && !force {
                    return Err(ReportError::FolderNotEmpty {
                        path: path.to_path_buf(),
                    });
                }
            }
            Err(e) if e.kind() == io::ErrorKind::NotFound => {
                fs::create_dir_all(path).map_err(|source| ReportError::Io {
                    path: path.to_path_buf(),
                    action: "create the results folder",
                    source,
                })?;
            }
            Err(source) => {
                return Err(ReportError::Io {
                    path: path.to_path_buf(),
                    action: "inspect the results folder",
                    source,
                });
            }
        }
        Ok(Self {
            root: path.to_path_buf(),
        })
    }

    /// The folder's path as given to [`ResultsDir::create`].
    pub fn path(&self) -> &Path {
        &self.root
    }

    /// Writes `bytes` to the file `name` inside the folder, atomically, and returns its path.
    ///
    /// `name` is a relative path such as `summary.json` or `plots/spectrum.svg`; missing
    /// sub-folders are created. Absolute names and `..` are refused
    /// ([`ReportError::BadFileName`]) so that nothing is written outside the folder.
    pub fn write(&self, name: &str, bytes: &[u8]) -> Result<PathBuf, ReportError> {
        let path = self.file_path(name)?;
        if let Some(parent) = path.parent() {
            fs::create_dir_all(parent).map_err(|source| ReportError::Io {
                path: parent.to_path_buf(),
                action: "create the folder",
                source,
            })?;
        }
        write_atomic(&path, bytes).map_err(|source| ReportError::Io {
            path: path.clone(),
            action: "write",
            source,
        })?;
        Ok(path)
    }

    /// Writes UTF-8 text (see [`ResultsDir::write`]).
    pub fn write_text(&self, name: &str, text: &str) -> Result<PathBuf, ReportError> {
        self.write(name, text.as_bytes())
    }

    /// Writes `value` as pretty-printed JSON (see [`super::to_json_pretty`]).
    pub fn write_json<T: serde::Serialize + ?Sized>(
        &self,
        name: &str,
        value: &T,
    ) -> Result<PathBuf, ReportError> {
        let text = super::to_json_pretty(name, value)?;
        self.write(name, text.as_bytes())
    }

    /// Writes a plot as `{stem}.svg` and `{stem}.png` of `width` × `height` pixels and
    /// returns both paths (SVG first).
    pub fn write_plot(
        &self,
        stem: &str,
        plot: &dyn Plot,
        width: u32,
        height: u32,
    ) -> Result<(PathBuf, PathBuf), ReportError> {
        let svg = self.write(
            &format!("{stem}.svg"),
            plot.to_svg(width, height).as_bytes(),
        )?;
        let png = self.write(&format!("{stem}.png"), &plot.to_png(width, height))?;
        Ok((svg, png))
    }

    /// The full path of `name`, checked to stay inside the folder.
    fn file_path(&self, name: &str) -> Result<PathBuf, ReportError> {
        let rel = Path::new(name);
        let bad = |reason: &str| ReportError::BadFileName {
            name: name.to_string(),
            reason: reason.to_string(),
        };
        if name.is_empty() {
            return Err(bad("the name is empty"));
        }
        for c in rel.components() {
            match c {
                Component::Normal(_) => {}
                Component::CurDir => {}
                Component::ParentDir => return Err(bad("it contains `..`")),
                Component::RootDir | Component::Prefix(_) => {
                    return Err(bad("it is an absolute path"));
                }
            }
        }
        if rel.file_name().is_none() {
            return Err(bad("it names no file"));
        }
        Ok(self.root.join(rel))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn file_names_outside_the_folder_are_refused() {
        let dir = ResultsDir {
            root: PathBuf::from("/nonexistent"),
        };
        assert!(dir.file_path("../x.json").is_err());
        assert!(dir.file_path("/etc/x.json").is_err());
        assert!(dir.file_path("").is_err());
        assert!(dir.file_path("a/../../x").is_err());
        assert_eq!(
            dir.file_path("plots/a.svg").unwrap(),
            PathBuf::from("/nonexistent/plots/a.svg")
        );
    }
}
