//! Writing issued files: never over an existing file, never a half-written
//! file under the final name.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    #[error("{path}: already exists; an issued file is never overwritten")]
    Exists { path: String },
    #[error("{path}: cannot write: {source}")]
    Io {
        path: String,
        #[source]
        source: std::io::Error,
    },
}

impl OutputError {
    pub fn hint(&self) -> String {
        match self {
            OutputError::Exists { .. } => {
                "choose another --out folder, or move the earlier file away if it was never sent"
                    .into()
            }
            OutputError::Io { .. } => "check that the folder exists and is writable".into(),
        }
    }
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> OutputError + '_ {
    move |source| OutputError::Io {
        path: path.display().to_string(),
        source,
    }
}

/// Checks that none of `names` exists in `dir`, so a set of files is either
/// all written or none is.
pub fn check_free(dir: &Path, names: &[String]) -> Result<(), OutputError> {
    for n in names {
        let p = dir.join(n);
        if p.exists() {
            return Err(OutputError::Exists {
                path: p.display().to_string(),
            });
        }
    }
    Ok(())
}

/// A file written under a temporary name, synced, waiting to be published.
#[derive(Debug, Clone, PartialEq)]
pub struct Staged {
    pub tmp: PathBuf,
    pub target: PathBuf,
}

const TMP_SUFFIX: &str = ".limen-tmp";

/// Writes `bytes` to `.<name>.<pid>.limen-tmp` in `dir` and syncs it.
pub fn stage(dir: &Path, name: &str, bytes: &[u8]) -> Result<Staged, OutputError> {
    let (s, f) = write_tmp(dir, name, bytes)?;
    f.sync_all().map_err(io(&s.tmp))?;
    Ok(s)
}

/// As `stage`, leaving the sync to `sync_staged`, so many files can be made
/// durable at once.
pub fn stage_unsynced(dir: &Path, name: &str, bytes: &[u8]) -> Result<Staged, OutputError> {
    write_tmp(dir, name, bytes).map(|(s, _)| s)
}

fn write_tmp(dir: &Path, name: &str, bytes: &[u8]) -> Result<(Staged, fs::File), OutputError> {
    fs::create_dir_all(dir).map_err(io(dir))?;
    let target = dir.join(name);
    let tmp = dir.join(format!(".{name}.{}{TMP_SUFFIX}", std::process::id()));
    let mut f = fs::File::create(&tmp).map_err(io(&tmp))?;
    f.write_all(bytes).map_err(io(&tmp))?;
    Ok((Staged { tmp, target }, f))
}

/// Makes staged files durable, after all are written so the device can
/// take them together. Each file is synced on its own: a whole-file-system
/// sync (`syncfs`) was measured to wait for every other writer's data on a
/// busy disk (10 s instead of under 1 s for one large report).
pub fn sync_staged(staged: &[&Staged]) -> Result<(), OutputError> {
    for s in staged {
        fs::File::open(&s.tmp)
            .and_then(|f| f.sync_all())
            .map_err(io(&s.tmp))?;
    }
    Ok(())
}

/// Gives a staged file its final name and makes the name durable; fails
/// rather than replace a file.
pub fn publish(s: &Staged) -> Result<(), OutputError> {
    link(s)?;
    if let Some(dir) = s.target.parent() {
        sync_dir(dir);
    }
    Ok(())
}

/// Gives a staged file its final name, not yet durable (`sync_dir`).
pub fn link(s: &Staged) -> Result<(), OutputError> {
    match fs::hard_link(&s.tmp, &s.target) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Err(OutputError::Exists {
            path: s.target.display().to_string(),
        }),
        Err(e) => Err(io(&s.target)(e)),
    }
}

/// Makes the names in `dir` durable before anything refers to them.
pub fn sync_dir(dir: &Path) {
    if let Ok(d) = fs::File::open(dir) {
        let _ = d.sync_all();
    }
}

pub fn discard(s: &Staged) {
    let _ = fs::remove_file(&s.tmp);
}

/// Removes temporary files that an interrupted run of limen left in `dir`
/// (their process is gone), returning their names.
pub fn sweep(dir: &Path) -> Vec<String> {
    let mut removed = Vec::new();
    let Ok(entries) = fs::read_dir(dir) else {
        return removed;
    };
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().into_owned();
        let Some(stem) = name.strip_suffix(TMP_SUFFIX) else {
            continue;
        };
        let pid = stem.rsplit('.').next().and_then(|p| p.parse::<u32>().ok());
        let alive = pid
            .is_some_and(|p| p == std::process::id() || Path::new(&format!("/proc/{p}")).exists());
        if !alive && fs::remove_file(e.path()).is_ok() {
            removed.push(name);
        }
    }
    removed.sort();
    removed
}

/// A file path as the folder it is in ("." for a bare name) and its name.
pub fn dir_and_name(path: &Path) -> (&Path, String) {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    (dir, name)
}

/// Writes `bytes` under `name` in `dir` through a synced temporary file;
/// never replaces an existing file.
pub fn write_new(dir: &Path, name: &str, bytes: &[u8]) -> Result<PathBuf, OutputError> {
    let s = stage(dir, name, bytes)?;
    let result = publish(&s);
    discard(&s);
    result.map(|()| s.target)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn never_overwrites() {
        let dir = std::env::temp_dir().join(format!("limen-out-{}", std::process::id()));
        let _ = fs::remove_dir_all(&dir);
        write_new(&dir, "a.csv", b"one").unwrap();
        let e = write_new(&dir, "a.csv", b"two").unwrap_err();
        assert!(matches!(e, OutputError::Exists { .. }));
        assert_eq!(fs::read(dir.join("a.csv")).unwrap(), b"one");
        assert!(check_free(&dir, &["a.csv".into()]).is_err());
        assert!(check_free(&dir, &["b.csv".into()]).is_ok());
        // No temporary file is left behind.
        assert_eq!(fs::read_dir(&dir).unwrap().count(), 1);
        // A leftover from a process that is gone is swept; a live one is not.
        fs::write(dir.join(".x.csv.4000000000.limen-tmp"), b"old").unwrap();
        let live = stage(&dir, "y.csv", b"new").unwrap();
        assert_eq!(sweep(&dir), vec![".x.csv.4000000000.limen-tmp".to_string()]);
        assert!(live.tmp.exists());
        discard(&live);
        fs::remove_dir_all(&dir).unwrap();
    }
}
