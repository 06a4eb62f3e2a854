//! Atomic writes and the results folder: a file is complete or absent, a failed write keeps
//! the old file, a non-empty folder is refused unless forced (POSIX `rename()` semantics,
//! IEEE Std 1003.1; STYLE.md §4).

use std::fs;
use std::io;

use lightfold::report::{ReportError, ResultsDir, write_atomic, write_atomic_with};

/// Files in `dir` other than `keep`.
fn others(dir: &std::path::Path, keep: &[&str]) -> Vec<String> {
    fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| !keep.contains(&n.as_str()))
        .collect()
}

#[test]
fn write_atomic_creates_and_replaces() {
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("summary.json");
    write_atomic(&path, b"first").unwrap();
    assert_eq!(fs::read(&path).unwrap(), b"first");
    write_atomic(&path, b"second, longer content").unwrap();
    assert_eq!(fs::read(&path).unwrap(), b"second, longer content");
    assert!(others(tmp.path(), &["summary.json"]).is_empty());
}

#[test]
fn failing_write_leaves_the_old_file_intact_and_no_temporary() {
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("report.html");
    fs::write(&path, "old report").unwrap();
    let err = write_atomic_with(&path, |w| {
        w.write_all(b"half a new rep")?;
        Err(io::Error::other("disk full (simulated)"))
    })
    .unwrap_err();
    assert!(err.to_string().contains("simulated"));
    assert_eq!(fs::read_to_string(&path).unwrap(), "old report");
    assert!(
        others(tmp.path(), &["report.html"]).is_empty(),
        "temporary file left behind"
    );
}

#[test]
fn write_into_a_missing_folder_fails_and_creates_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("missing").join("a.csv");
    assert!(write_atomic(&path, b"x").is_err());
    assert!(!tmp.path().join("missing").exists());
}

#[test]
fn rename_onto_a_folder_fails_and_keeps_it() {
    // The target is a non-empty folder: the rename must fail and change nothing.
    let tmp = tempfile::tempdir().unwrap();
    let target = tmp.path().join("plots");
    fs::create_dir(&target).unwrap();
    fs::write(target.join("keep.svg"), "<svg/>").unwrap();
    assert!(write_atomic(&target, b"not a folder").is_err());
    assert_eq!(
        fs::read_to_string(target.join("keep.svg")).unwrap(),
        "<svg/>"
    );
    assert!(others(tmp.path(), &["plots"]).is_empty());
}

#[test]
fn results_folder_is_created_with_parents() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = ResultsDir::create(&tmp.path().join("a/b/results"), false).unwrap();
    let p = dir.write_text("plots/spectrum.svg", "<svg/>").unwrap();
    assert_eq!(fs::read_to_string(p).unwrap(), "<svg/>");
}

#[test]
fn empty_existing_folder_is_accepted() {
    let tmp = tempfile::tempdir().unwrap();
    assert!(ResultsDir::create(tmp.path(), false).is_ok());
}

#[test]
fn non_empty_folder_is_refused_unless_forced() {
    let tmp = tempfile::tempdir().unwrap();
    fs::write(tmp.path().join("old.txt"), "old").unwrap();
    let err = ResultsDir::create(tmp.path(), false).unwrap_err();
    assert!(matches!(err, ReportError::FolderNotEmpty { .. }), "{err:?}");
    let msg = err.to_string();
    assert!(
        msg.contains("--force") && msg.contains("not empty"),
        "{msg}"
    );

    let dir = ResultsDir::create(tmp.path(), true).unwrap();
    dir.write_text("old.txt", "new").unwrap();
    assert_eq!(
        fs::read_to_string(tmp.path().join("old.txt")).unwrap(),
        "new"
    );
}

#[test]
fn a_file_is_not_a_results_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let file = tmp.path().join("results");
    fs::write(&file, "x").unwrap();
    let err = ResultsDir::create(&file, true).unwrap_err();
    assert!(matches!(err, ReportError::NotAFolder { .. }), "{err:?}");
}

#[test]
fn names_leaving_the_folder_are_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = ResultsDir::create(&tmp.path().join("r"), false).unwrap();
    for bad in ["../escape.txt", "/tmp/abs.txt", "", "a/../../b.txt"] {
        let err = dir.write_text(bad, "x").unwrap_err();
        assert!(
            matches!(err, ReportError::BadFileName { .. }),
            "{bad}: {err:?}"
        );
    }
    assert!(!tmp.path().join("escape.txt").exists());
}

#[test]
fn json_is_pretty_and_ends_with_a_newline() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = ResultsDir::create(tmp.path(), false).unwrap();
    let p = dir
        .write_json(
            "summary.json",
            &serde_json::json!({"jsc_ma_cm2": 41.25, "seed": 7}),
        )
        .unwrap();
    let text = fs::read_to_string(p).unwrap();
    assert!(text.ends_with("}\n"));
    assert!(text.contains("\n  \"jsc_ma_cm2\": 41.25"));
    let back: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(back["seed"], 7);
}
