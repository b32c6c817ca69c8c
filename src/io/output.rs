//! Writing results: atomically, as whole sets, and never over a file the run did not write.
//!
//! [`write_atomic`] writes one file to a temporary file in the destination's directory and
//! renames it into place, so an interrupted run leaves either the old file or the new one,
//! never half a file. [`OutputSet`] writes a command's whole output set so that a reader
//! never sees a mix of an old run's files and a new run's (`docs/case-files.md`, outputs):
//! the files are written into a fresh temporary folder beside the output directory, with a
//! manifest ([`MANIFEST_NAME`]) listing them; then the folder is renamed into place (when the
//! output directory is new, or holds nothing but an earlier set, the earlier set is first
//! renamed aside and removed after). When the output directory holds other files, the set is
//! moved in file by file after the old manifest is removed, and the new manifest is written
//! last, so a reader who checks the manifest against the files knows whether the set is whole.
//!
//! [`check_output_names`] refuses, before any work, an output that would replace an input, and
//! an existing file of an output's name that no earlier run wrote (one not listed in the
//! directory's manifest) unless the user asks to overwrite it. Temporary files and folders are
//! named `.edgetherm-<process id>-….tmp`; every set and single-file write first removes those
//! of processes that no longer run ([`clean_stale_temporaries`]).

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Component, Path, PathBuf};

/// The manifest of an output set: which files the run wrote, their sizes, the command and
/// the version. Written last; its absence while the other files exist means a set is being
/// replaced (or a run was interrupted while moving files into a shared directory).
pub const MANIFEST_NAME: &str = "edgetherm-manifest.json";

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

/// Temporary files and folders older than this whose process cannot be checked (no `/proc`)
/// are taken as left by an interrupted run.
const STALE_AGE: std::time::Duration = std::time::Duration::from_secs(24 * 3600);

/// The prefix of this process's temporary files: `.edgetherm-<pid>-`.
pub(crate) fn temp_prefix() -> String {
    format!(".edgetherm-{}-", std::process::id())
}

/// Remove temporary files and folders (`.edgetherm-*.tmp`) that earlier, interrupted runs
/// left in `dir`: those whose process no longer runs (checked in `/proc` where there is one),
/// and, without `/proc` or for names without a process id, those older than a day. Errors are
/// ignored: cleaning never stops a run. Returns how many were removed.
pub fn clean_stale_temporaries(dir: &Path) -> usize {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return 0;
    };
    let proc_ok = Path::new("/proc/self").exists();
    let mut removed = 0;
    for entry in entries.flatten() {
        let name = entry.file_name();
        let Some(name) = name.to_str() else { continue };
        let Some(rest) = name
            .strip_prefix(".edgetherm-")
            .and_then(|r| r.strip_suffix(".tmp"))
        else {
            continue;
        };
        let pid = rest.split('-').next().and_then(|p| p.parse::<u32>().ok());
        let stale = match pid {
            Some(pid) if pid == std::process::id() => false,
            Some(pid) if proc_ok => !Path::new("/proc").join(pid.to_string()).exists(),
            _ => entry
                .metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_some_and(|age| age > STALE_AGE),
        };
        if !stale {
            continue;
        }
        let path = entry.path();
        let gone = match entry.file_type() {
            Ok(t) if t.is_dir() => std::fs::remove_dir_all(&path).is_ok(),
            _ => std::fs::remove_file(&path).is_ok(),
        };
        removed += usize::from(gone);
    }
    removed
}

/// The names of the files listed in the manifest of `dir` (empty when there is none or it
/// cannot be read).
pub fn manifest_files(dir: &Path) -> Vec<String> {
    let Ok(text) = std::fs::read_to_string(dir.join(MANIFEST_NAME)) else {
        return Vec::new();
    };
    let Ok(v) = serde_json::from_str::<serde_json::Value>(&text) else {
        return Vec::new();
    };
    v["files"]
        .as_array()
        .map(|a| {
            a.iter()
                .filter_map(|f| f["name"].as_str().map(str::to_string))
                .collect()
        })
        .unwrap_or_default()
}

/// Check a set read from `dir` against its manifest: every listed file present with the
/// listed size. `Ok(names)` when the set is whole.
///
/// # Errors
/// A message saying what is missing or different (no manifest: a set being written, or one
/// written by an interrupted run into a shared directory).
pub fn verify_manifest(dir: &Path) -> std::result::Result<Vec<String>, String> {
    let text = std::fs::read_to_string(dir.join(MANIFEST_NAME))
        .map_err(|e| format!("no readable {MANIFEST_NAME}: {e}"))?;
    let v: serde_json::Value =
        serde_json::from_str(&text).map_err(|e| format!("{MANIFEST_NAME} is not JSON: {e}"))?;
    let files = v["files"]
        .as_array()
        .ok_or_else(|| format!("{MANIFEST_NAME} lists no files"))?;
    let mut names = Vec::new();
    for f in files {
        let name = f["name"].as_str().unwrap_or_default();
        let size = f["bytes"].as_u64();
        let actual = std::fs::metadata(dir.join(name)).map(|m| m.len()).ok();
        if actual.is_none() || actual != size {
            return Err(format!(
                "{name}: listed with {size:?} bytes, found {actual:?}"
            ));
        }
        names.push(name.to_string());
    }
    Ok(names)
}

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
    clean_stale_temporaries(dir);
    let mut tmp = tempfile::Builder::new()
        .prefix(&temp_prefix())
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
/// would replace one of `inputs`, or that is itself an input file, or where a file of an
/// output's name exists that no earlier run wrote (see [`check_output_names`]). Paths are
/// compared after canonicalisation, so `.`/`..`, relative paths and symbolic links do not hide
/// a clash; the output directory need not exist yet.
pub fn check_output_dir(out: &Path, inputs: &[&Path], overwrite: bool) -> Result<()> {
    check_output_names(out, &OUTPUT_FILE_NAMES, inputs, overwrite)
}

/// [`check_output_dir`] for a command that writes the files `names` (`edgetherm design`
/// writes `layout.csv`, `design.json`, `design.svg`). An input is never replaced, whatever
/// `overwrite` says; an existing file of an output's name that is not listed in the
/// directory's manifest (so no earlier run of this program wrote it) is refused unless
/// `overwrite` (the `--overwrite` flag).
pub fn check_output_names(
    out: &Path,
    names: &[&str],
    inputs: &[&Path],
    overwrite: bool,
) -> Result<()> {
    let out_c = canonical(out);
    let refuse = |input: &Path, what: String| {
        Error::invalid_at(
            out,
            None,
            Some("option.out"),
            format!(
                "{what} {}, an input; inputs are never overwritten, so choose another output \
                 directory (--out DIR)",
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
    if out.exists() && !out.is_dir() {
        return Err(Error::invalid_at(
            out,
            None,
            Some("option.out"),
            "this is a file, not a directory; choose a directory for the outputs",
        ));
    }
    if !overwrite {
        let listed = manifest_files(out);
        for &name in names.iter().chain(std::iter::once(&MANIFEST_NAME)) {
            let target = out.join(name);
            let ours = name == MANIFEST_NAME || listed.iter().any(|l| l == name);
            if target.symlink_metadata().is_ok() && !ours {
                return Err(Error::invalid_at(
                    &target,
                    None,
                    Some("option.overwrite"),
                    format!(
                        "this file exists and no earlier run of edgetherm wrote it (it is not \
                         listed in {MANIFEST_NAME}); it is never replaced without \
                         --overwrite: choose another output directory, or give --overwrite if \
                         it may go"
                    ),
                ));
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

/// Refuse (with [`Error::Invalid`], exit status 2) an output file that is one of `inputs`, or
/// that exists already and `overwrite` is off (a single file has no manifest, so any
/// existing file is taken as one this run did not write). `flag` names the option that chose
/// it (`--out`, `--field`).
pub fn check_output_file(out: &Path, flag: &str, inputs: &[&Path], overwrite: bool) -> Result<()> {
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
    if out.is_dir() {
        return Err(Error::invalid_at(
            out,
            None,
            Some(flag),
            "this is a directory; give a file name",
        ));
    }
    if !overwrite && out.symlink_metadata().is_ok() {
        return Err(Error::invalid_at(
            out,
            None,
            Some(flag),
            "this file exists; an existing file is never replaced without --overwrite (it may \
             hold measurements): choose another file, or give --overwrite if it may go",
        ));
    }
    Ok(())
}

/// How a set reaches its output directory.
enum Placement {
    /// The staging folder is renamed to the output directory (which does not exist).
    Fresh,
    /// The output directory holds only an earlier set: renamed aside, the staging folder
    /// renamed into place, the earlier set removed.
    Swap,
    /// The output directory holds other files too: files moved in one by one, the old
    /// manifest removed first and the new one written last.
    PerFile,
}

/// A command's output set being written (module doc). Create it with [`OutputSet::begin`]
/// once the results are computed (or, for a streamed file, before), [`OutputSet::write`] each
/// file, then [`OutputSet::commit`]. Dropped without a commit, it leaves the output directory
/// as it was.
pub struct OutputSet {
    out: PathBuf,
    staging: tempfile::TempDir,
    /// The staging folder sits beside `out` (so that it can be renamed onto it).
    beside: bool,
    /// Files written straight into `out` (a live `track.csv`), which forces file-by-file
    /// placement.
    in_place: Vec<String>,
    files: Vec<(String, u64)>,
    command: String,
}

impl OutputSet {
    /// Start a set for `command` in `out`. Creates `out`'s parent if needed and removes stale
    /// temporaries of earlier runs beside and inside `out`.
    ///
    /// # Errors
    /// [`Error::Io`] (exit status 1) when no staging folder can be created.
    pub fn begin(out: &Path, command: &str) -> Result<Self> {
        let io_err = |path: &Path, source: std::io::Error| Error::Io {
            path: path.to_path_buf(),
            source,
            input: false,
        };
        let parent = match out.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        std::fs::create_dir_all(&parent).map_err(|e| io_err(&parent, e))?;
        clean_stale_temporaries(&parent);
        clean_stale_temporaries(out);
        let prefix = temp_prefix();
        let make = |dir: &Path| {
            tempfile::Builder::new()
                .prefix(&prefix)
                .suffix(".tmp")
                .tempdir_in(dir)
        };
        let (staging, beside) = match make(&parent) {
            Ok(d) => (d, true),
            Err(_) => {
                std::fs::create_dir_all(out).map_err(|e| io_err(out, e))?;
                (make(out).map_err(|e| io_err(out, e))?, false)
            }
        };
        Ok(OutputSet {
            out: out.to_path_buf(),
            staging,
            beside,
            in_place: Vec::new(),
            files: Vec::new(),
            command: command.to_string(),
        })
    }

    /// Write one file of the set (into the staging folder).
    ///
    /// # Errors
    /// [`Error::Io`] when writing fails.
    pub fn write(&mut self, name: &str, bytes: &[u8]) -> Result<()> {
        write_atomic(&self.staging.path().join(name), bytes)?;
        self.files.push((name.to_string(), bytes.len() as u64));
        Ok(())
    }

    /// Write the files `produce` hands over (each as [`Self::write`]), each on a thread of
    /// its own started as soon as its bytes are handed over: the threads mostly wait on
    /// their `fsync`, waits issued together end together (on the 2-core bench machine
    /// 3.4 ms -> 2.5 ms for the estimate's seven files, against two at a time on the compute
    /// threads), and writing the first files overlaps making the last. A file whose thread
    /// cannot be started is written where it is handed over. `produce` is given the
    /// function to hand a file over with (from any thread) and must hand over each of
    /// `names` once; the files are recorded in the order of `names`. Every outcome is kept,
    /// so that the error reported is the first in that order (a temporary of this process
    /// is never taken for a stale one by another write).
    ///
    /// # Errors
    /// The error of `produce`; else the first [`Error::Io`] in the order of `names`; an
    /// [`Error::Internal`] when a name was not handed over once. On an error nothing is
    /// recorded.
    pub fn write_as_produced<F>(&mut self, names: &[&str], produce: F) -> Result<()>
    where
        F: FnOnce(&(dyn Fn(&'static str, Vec<u8>) + Sync)) -> Result<()>,
    {
        let staging = self.staging.path();
        let (produced, mut done) = std::thread::scope(|scope| {
            let handed = std::sync::Mutex::new(Vec::new());
            let hand_over = |name: &'static str, bytes: Vec<u8>| {
                let len = bytes.len() as u64;
                let bytes = std::sync::Arc::new(bytes);
                let for_thread = std::sync::Arc::clone(&bytes);
                let pending = std::thread::Builder::new()
                    .name("edgetherm-write".into())
                    .spawn_scoped(scope, move || {
                        write_atomic(&staging.join(name), &for_thread)
                    })
                    .map_err(|_| write_atomic(&staging.join(name), &bytes));
                handed
                    .lock()
                    .unwrap_or_else(std::sync::PoisonError::into_inner)
                    .push((name, len, pending));
            };
            let produced = produce(&hand_over);
            let done: Vec<(&str, u64, Result<()>)> = handed
                .into_inner()
                .unwrap_or_else(std::sync::PoisonError::into_inner)
                .into_iter()
                .map(|(name, len, pending)| {
                    let outcome = match pending {
                        Ok(thread) => thread.join().unwrap_or_else(|_| {
                            Err(Error::Internal("a thread writing an output stopped".into()))
                        }),
                        Err(written_here) => written_here,
                    };
                    (name, len, outcome)
                })
                .collect();
            (produced, done)
        });
        produced?;
        let mut files = Vec::with_capacity(names.len());
        for &name in names {
            let at = done.iter().position(|(n, _, _)| *n == name);
            let (_, len, outcome) = match at {
                Some(i) if done[i + 1..].iter().all(|(n, _, _)| *n != name) => done.swap_remove(i),
                _ => {
                    return Err(Error::Internal(format!(
                        "the output {name} was not made exactly once"
                    )));
                }
            };
            outcome?;
            files.push((name.to_string(), len));
        }
        if let Some((extra, _, _)) = done.first() {
            return Err(Error::Internal(format!(
                "an output {extra} that was not expected"
            )));
        }
        self.files.extend(files);
        Ok(())
    }

    /// The path where a file of the set is streamed (in the staging folder); call
    /// [`Self::record`] once it is complete.
    pub fn staging_path(&self, name: &str) -> PathBuf {
        self.staging.path().join(name)
    }

    /// The path of a file that must be visible while the run goes on (a live `track.csv`):
    /// in the output directory itself (created if needed). The old manifest is removed now,
    /// so a reader knows that the set is being replaced; call [`Self::record`] once the file
    /// is complete.
    ///
    /// # Errors
    /// [`Error::Io`] when the directory cannot be created or the old manifest removed.
    pub fn live_path(&mut self, name: &str) -> Result<PathBuf> {
        create_output_dir(&self.out)?;
        remove_if_present(&self.out.join(MANIFEST_NAME))?;
        self.in_place.push(name.to_string());
        Ok(self.out.join(name))
    }

    /// Record a file streamed to [`Self::staging_path`] or [`Self::live_path`].
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be read back.
    pub fn record(&mut self, name: &str) -> Result<()> {
        let path = if self.in_place.iter().any(|n| n == name) {
            self.out.join(name)
        } else {
            self.staging_path(name)
        };
        let len = std::fs::metadata(&path)
            .map_err(|source| Error::Io {
                path: path.clone(),
                source,
                input: false,
            })?
            .len();
        self.files.push((name.to_string(), len));
        Ok(())
    }

    /// Write the manifest and move the set into place (module doc). Returns the paths of the
    /// files, in the order they were written (the manifest not included).
    ///
    /// # Errors
    /// [`Error::Io`] when a write or a rename fails; the earlier set is then left in place
    /// (or, file by file, without its manifest).
    pub fn commit(self) -> Result<Vec<PathBuf>> {
        let io_err = |path: &Path, source: std::io::Error| Error::Io {
            path: path.to_path_buf(),
            source,
            input: false,
        };
        let manifest = serde_json::json!({
            "written_by": format!("edgetherm {}", env!("CARGO_PKG_VERSION")),
            "command": self.command,
            "files": self.files.iter().map(|(n, b)| serde_json::json!({"name": n, "bytes": b}))
                .collect::<Vec<_>>(),
            "note": "written last: a set is whole when every file listed here is present with \
                     this size",
        });
        write_atomic(
            &self.staging.path().join(MANIFEST_NAME),
            format!("{manifest:#}\n").as_bytes(),
        )?;
        let paths: Vec<PathBuf> = self.files.iter().map(|(n, _)| self.out.join(n)).collect();
        let placement = self.placement();
        let staging = self.staging.path().to_path_buf();
        match placement {
            Placement::Fresh => {
                set_dir_permissions(&staging);
                std::fs::rename(&staging, &self.out).map_err(|e| io_err(&self.out, e))?;
                let _ = self.staging.keep();
            }
            Placement::Swap => {
                let parent = staging.parent().unwrap_or(Path::new(".")).to_path_buf();
                let name = staging
                    .file_name()
                    .and_then(|n| n.to_str())
                    .unwrap_or(".edgetherm-set.tmp")
                    .trim_end_matches(".tmp")
                    .to_string();
                let aside = parent.join(format!("{name}-old.tmp"));
                if std::fs::rename(&self.out, &aside).is_err() {
                    return self.move_files(paths);
                }
                set_dir_permissions(&staging);
                if let Err(e) = std::fs::rename(&staging, &self.out) {
                    let _ = std::fs::rename(&aside, &self.out);
                    return Err(io_err(&self.out, e));
                }
                let _ = self.staging.keep();
                let _ = std::fs::remove_dir_all(&aside);
            }
            Placement::PerFile => return self.move_files(paths),
        }
        Ok(paths)
    }

    fn placement(&self) -> Placement {
        if !self.beside || !self.in_place.is_empty() {
            return Placement::PerFile;
        }
        match self.out.symlink_metadata() {
            Err(_) => Placement::Fresh,
            Ok(m) if !m.is_dir() => Placement::PerFile,
            Ok(_) => {
                let ours =
                    |name: &str| name == MANIFEST_NAME || self.files.iter().any(|(n, _)| n == name);
                let only_ours = std::fs::read_dir(&self.out).is_ok_and(|entries| {
                    entries.flatten().all(|e| {
                        e.file_type().is_ok_and(|t| t.is_file())
                            && e.file_name().to_str().is_some_and(ours)
                    })
                });
                if only_ours {
                    Placement::Swap
                } else {
                    Placement::PerFile
                }
            }
        }
    }

    /// File by file: the old manifest removed first, each file renamed in, the manifest last.
    fn move_files(self, paths: Vec<PathBuf>) -> Result<Vec<PathBuf>> {
        create_output_dir(&self.out)?;
        remove_if_present(&self.out.join(MANIFEST_NAME))?;
        for (name, _) in &self.files {
            if self.in_place.iter().any(|n| n == name) {
                continue;
            }
            let to = self.out.join(name);
            std::fs::rename(self.staging.path().join(name), &to).map_err(|source| Error::Io {
                path: to.clone(),
                source,
                input: false,
            })?;
        }
        let to = self.out.join(MANIFEST_NAME);
        std::fs::rename(self.staging.path().join(MANIFEST_NAME), &to).map_err(|source| {
            Error::Io {
                path: to.clone(),
                source,
                input: false,
            }
        })?;
        Ok(paths)
    }
}

fn remove_if_present(path: &Path) -> Result<()> {
    match std::fs::remove_file(path) {
        Err(e) if e.kind() != std::io::ErrorKind::NotFound => Err(Error::Io {
            path: path.to_path_buf(),
            source: e,
            input: false,
        }),
        _ => Ok(()),
    }
}

/// tempfile creates folders readable by the owner only; an output directory is an ordinary
/// one.
fn set_dir_permissions(_dir: &Path) {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        let _ = std::fs::set_permissions(_dir, std::fs::Permissions::from_mode(0o755));
    }
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
        let e = check_output_dir(d.path(), &inputs, false).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("sensors.csv"), "{e}");
        // the same directory spelt differently
        let sub = d.path().join("sub");
        std::fs::create_dir(&sub).unwrap();
        let e = check_output_dir(&sub.join(".."), &inputs, false).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        let e = check_output_dir(&sub.join("new/../.."), &inputs, false).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        // an input file as the output directory
        assert!(check_output_dir(&plate, &inputs, false).is_err());
        // a fresh directory is fine, existing or not
        assert!(check_output_dir(&sub, &inputs, false).is_ok());
        assert!(check_output_dir(&d.path().join("out"), &inputs, false).is_ok());
    }

    fn names_in(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    /// A set reaches a new directory, then replaces itself (swap) with no temporaries left;
    /// a set dropped before its commit (an interrupted run) leaves the earlier set whole.
    #[test]
    fn sets_are_whole_or_absent() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        let mut set = OutputSet::begin(&out, "test").unwrap();
        set.write("a.csv", b"old a").unwrap();
        set.write("b.csv", b"old b").unwrap();
        assert!(!out.exists(), "nothing visible before the commit");
        set.commit().unwrap();
        assert_eq!(verify_manifest(&out).unwrap(), ["a.csv", "b.csv"]);
        // interrupted: half a new set written, never committed
        let mut set = OutputSet::begin(&out, "test").unwrap();
        set.write("a.csv", b"new a, longer").unwrap();
        drop(set);
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"old a");
        assert!(verify_manifest(&out).is_ok());
        // a whole new set replaces the old one
        let mut set = OutputSet::begin(&out, "test").unwrap();
        set.write("a.csv", b"new a, longer").unwrap();
        set.write("b.csv", b"new b").unwrap();
        set.commit().unwrap();
        assert_eq!(std::fs::read(out.join("b.csv")).unwrap(), b"new b");
        assert!(verify_manifest(&out).is_ok());
        assert_eq!(names_in(d.path()), ["out"], "no temporaries left beside");
        assert_eq!(names_in(&out), ["a.csv", "b.csv", MANIFEST_NAME]);
    }

    /// In a directory holding other files, the set is moved in file by file, the other files
    /// stay, and the manifest (written last) verifies; a size that differs does not.
    #[test]
    fn shared_directory_file_by_file() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("notes.txt"), "mine").unwrap();
        let mut set = OutputSet::begin(d.path(), "test").unwrap();
        set.write("a.csv", b"a").unwrap();
        let written = set.commit().unwrap();
        assert_eq!(written, [d.path().join("a.csv")]);
        assert_eq!(
            std::fs::read_to_string(d.path().join("notes.txt")).unwrap(),
            "mine"
        );
        assert!(verify_manifest(d.path()).is_ok());
        std::fs::write(d.path().join("a.csv"), "changed").unwrap();
        assert!(verify_manifest(d.path()).is_err());
        assert_eq!(names_in(d.path()), ["a.csv", MANIFEST_NAME, "notes.txt"]);
    }

    /// Temporaries of a process that no longer runs go; this process's own stay.
    #[cfg(target_os = "linux")]
    #[test]
    fn stale_temporaries_are_removed() {
        let d = tempfile::tempdir().unwrap();
        // 4,294,967,295 is above Linux's largest process id (2^22), so no such process runs
        let dead = d.path().join(".edgetherm-4294967295-x1.tmp");
        std::fs::write(&dead, "half").unwrap();
        std::fs::create_dir(d.path().join(".edgetherm-4294967295-set.tmp")).unwrap();
        let mine = d.path().join(format!("{}keep.tmp", temp_prefix()));
        std::fs::write(&mine, "in use").unwrap();
        let other = d.path().join("results.csv");
        std::fs::write(&other, "x").unwrap();
        assert_eq!(clean_stale_temporaries(d.path()), 2);
        assert!(!dead.exists() && mine.exists() && other.exists());
    }

    /// An existing file no earlier run wrote is refused without overwrite; one the manifest
    /// lists is not.
    #[test]
    fn foreign_files_need_overwrite() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("summary.json"), "{}").unwrap();
        let e = check_output_dir(d.path(), &[], false).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("--overwrite"), "{e}");
        assert!(check_output_dir(d.path(), &[], true).is_ok());
        let mut set = OutputSet::begin(d.path(), "estimate").unwrap();
        set.write("summary.json", b"{\"a\": 1}").unwrap();
        set.commit().unwrap();
        assert!(check_output_dir(d.path(), &[], false).is_ok());
        let f = d.path().join("readings.csv");
        std::fs::write(&f, "sensor,temperature\n").unwrap();
        assert!(check_output_file(&f, "--out", &[], false).is_err());
        assert!(check_output_file(&f, "--out", &[], true).is_ok());
        assert!(check_output_file(&f, "--out", &[f.as_path()], true).is_err());
    }

    /// Files handed over from several threads in any order are written and recorded in the
    /// order of the names; a name handed over twice or not at all, or a failure of the
    /// producer, is an error with nothing recorded, and the set's earlier files stay whole.
    #[test]
    fn files_written_as_produced_are_recorded_in_order() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        let mut set = OutputSet::begin(&out, "test").unwrap();
        set.write_as_produced(&["a.csv", "b.csv", "c.csv"], |emit| {
            std::thread::scope(|scope| {
                scope.spawn(|| emit("c.csv", b"ccc".to_vec()));
                scope.spawn(|| emit("a.csv", b"a".to_vec()));
            });
            emit("b.csv", b"bb".to_vec());
            Ok(())
        })
        .unwrap();
        let written = set.commit().unwrap();
        assert_eq!(
            written,
            ["a.csv", "b.csv", "c.csv"].map(|n| out.join(n)).to_vec()
        );
        assert_eq!(verify_manifest(&out).unwrap(), ["a.csv", "b.csv", "c.csv"]);
        assert_eq!(std::fs::read(out.join("c.csv")).unwrap(), b"ccc");
        for bad in 0..3 {
            let mut set = OutputSet::begin(&out, "test").unwrap();
            let e = set
                .write_as_produced(&["a.csv", "b.csv"], |emit| {
                    emit("a.csv", b"new".to_vec());
                    match bad {
                        0 => Ok(()),
                        1 => {
                            emit("b.csv", b"new".to_vec());
                            emit("b.csv", b"again".to_vec());
                            Ok(())
                        }
                        _ => Err(Error::Internal("the renderer failed".into())),
                    }
                })
                .unwrap_err();
            assert_eq!(e.exit_code(), 1, "case {bad}: {e}");
            assert!(set.files.is_empty(), "case {bad}: nothing recorded");
            drop(set);
            assert_eq!(
                std::fs::read(out.join("a.csv")).unwrap(),
                b"a",
                "case {bad}"
            );
            assert!(verify_manifest(&out).is_ok(), "case {bad}");
        }
    }
}
