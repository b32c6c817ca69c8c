//! Writing results: atomically, and never over an input.
//!
//! [`write_atomic`] writes to a temporary file in the destination's directory and renames it
//! into place, so an interrupted run leaves either the old file or the new one, never half a
//! file (`docs/case-files.md`, outputs). [`check_output_dir`] refuses an output directory whose result files
//! would replace an input (the case directory itself holds a `sensors.csv`, say).

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Component, Path, PathBuf};

/// The names of the files a run may write into its output directory (`docs/case-files.md`, outputs).
pub const OUTPUT_FILE_NAMES: [&str; 7] = [
    "profile.csv",
    "field.csv",
    "sensors.csv",
    "summary.json",
    "profile.svg",
    "field.svg",
    "report.html",
];

/// Write `bytes` to `path` atomically: a temporary file beside it, flushed and synced, then
/// renamed over `path`. The directory must exist.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let io_err = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source,
        input: false,
    };
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut tmp = tempfile::Builder::new()
        .prefix(".edgetherm-")
        .suffix(".tmp")
        .tempfile_in(dir)
        .map_err(io_err)?;
    tmp.write_all(bytes).map_err(io_err)?;
    // tempfile creates its files readable by the owner only; results are ordinary files.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file()
            .set_permissions(std::fs::Permissions::from_mode(0o644))
            .map_err(io_err)?;
    }
    tmp.as_file().sync_all().map_err(io_err)?;
    tmp.persist(path).map_err(|e| io_err(e.error))?;
    Ok(())
}

/// Refuse (with [`Error::Invalid`], exit status 2) an output directory where a result file
/// would replace one of `inputs`, or that is itself an input file. Paths are compared after
/// canonicalisation, so `.`/`..`, relative paths and symbolic links do not hide a clash; the
/// output directory need not exist yet.
pub fn check_output_dir(out: &Path, inputs: &[&Path]) -> Result<()> {
    check_output_names(out, &OUTPUT_FILE_NAMES, inputs)
}

/// [`check_output_dir`] for a command that writes the files `names` (`edgetherm design`
/// writes `layout.csv`, `design.json`, `design.svg`).
pub fn check_output_names(out: &Path, names: &[&str], inputs: &[&Path]) -> Result<()> {
    let out_c = canonical(out);
    let refuse = |input: &Path, what: String| {
        Error::invalid_at(
            out,
            None,
            Some("option.out"),
            format!(
                "{what} {}, an input; inputs are never overwritten, so choose another output \
                 directory (the default is ./edgetherm-out)",
                input.display()
            ),
        )
    };
    for &input in inputs {
        let input_c = canonical(input);
        if input_c == out_c {
            return Err(refuse(
                input,
                "the output directory is the file".to_string(),
            ));
        }
        for &name in names {
            let target = out_c.join(name);
            let target_c = if target.exists() {
                canonical(&target)
            } else {
                target
            };
            if target_c == input_c {
                return Err(refuse(input, format!("the output {name} would replace")));
            }
        }
    }
    Ok(())
}

/// Create the output directory (and its parents) if it does not exist.
pub fn create_output_dir(dir: &Path) -> Result<()> {
    std::fs::create_dir_all(dir).map_err(|source| Error::Io {
        path: dir.to_path_buf(),
        source,
        input: false,
    })
}

/// Refuse (with [`Error::Invalid`], exit status 2) an output file that is one of `inputs`.
/// `flag` names the option that chose it (`--out`, `--field`).
pub fn check_output_file(out: &Path, flag: &str, inputs: &[&Path]) -> Result<()> {
    let out_c = canonical(out);
    for &input in inputs {
        if canonical(input) == out_c {
            return Err(Error::invalid_at(
                out,
                None,
                Some(flag),
                format!(
                    "this output would replace {}, an input of this run; inputs are never \
                     overwritten, so choose another file",
                    input.display()
                ),
            ));
        }
    }
    Ok(())
}

/// The canonical form of `p`: its longest existing ancestor canonicalised, the rest appended
/// with `.` and `..` resolved lexically.
fn canonical(p: &Path) -> PathBuf {
    if let Ok(c) = p.canonicalize() {
        return c;
    }
    let abs = if p.is_absolute() {
        p.to_path_buf()
    } else {
        std::env::current_dir()
            .map(|d| d.join(p))
            .unwrap_or_else(|_| p.to_path_buf())
    };
    let mut existing = abs.as_path();
    let mut rest: Vec<Component<'_>> = Vec::new();
    loop {
        if let Ok(c) = existing.canonicalize() {
            let mut out = c;
            for comp in rest.iter().rev() {
                match comp {
                    Component::ParentDir => {
                        out.pop();
                    }
                    Component::CurDir => {}
                    other => out.push(other.as_os_str()),
                }
            }
            return out;
        }
        match (existing.parent(), existing.components().next_back()) {
            (Some(parent), Some(last)) => {
                rest.push(last);
                existing = parent;
            }
            _ => return abs,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_atomically_and_replaces() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("summary.json");
        write_atomic(&p, b"{\"a\": 1}").unwrap();
        write_atomic(&p, b"{\"a\": 2}").unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "{\"a\": 2}");
        // no temporary files left behind
        let names: Vec<_> = std::fs::read_dir(d.path()).unwrap().collect();
        assert_eq!(names.len(), 1);
        let e = write_atomic(&d.path().join("no/such/dir/x.csv"), b"x").unwrap_err();
        assert_eq!(e.exit_code(), 1);
    }

    #[test]
    fn refuses_to_overwrite_inputs() {
        let d = tempfile::tempdir().unwrap();
        let sensors = d.path().join("sensors.csv");
        let plate = d.path().join("plate.toml");
        std::fs::write(&sensors, "sensor,x,y\n").unwrap();
        std::fs::write(&plate, "").unwrap();
        let inputs = [plate.as_path(), sensors.as_path()];
        let e = check_output_dir(d.path(), &inputs).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("sensors.csv"), "{e}");
        // the same directory spelt differently
        let sub = d.path().join("sub");
        std::fs::create_dir(&sub).unwrap();
        let e = check_output_dir(&sub.join(".."), &inputs).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        let e = check_output_dir(&sub.join("new/../.."), &inputs).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        // an input file as the output directory
        assert!(check_output_dir(&plate, &inputs).is_err());
        // a fresh directory is fine, existing or not
        assert!(check_output_dir(&sub, &inputs).is_ok());
        assert!(check_output_dir(&d.path().join("out"), &inputs).is_ok());
    }
}
