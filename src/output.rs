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

/// Writes `bytes` to a temporary file in `dir`, syncs it, then links it to
/// `name`; linking fails rather than replace a file that appeared meanwhile.
pub fn write_new(dir: &Path, name: &str, bytes: &[u8]) -> Result<PathBuf, OutputError> {
    fs::create_dir_all(dir).map_err(io(dir))?;
    let target = dir.join(name);
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = fs::File::create(&tmp).map_err(io(&tmp))?;
        f.write_all(bytes).map_err(io(&tmp))?;
        f.sync_all().map_err(io(&tmp))?;
        drop(f);
        match fs::hard_link(&tmp, &target) {
            Ok(()) => Ok(()),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Err(OutputError::Exists {
                path: target.display().to_string(),
            }),
            Err(e) => Err(io(&target)(e)),
        }
    })();
    let _ = fs::remove_file(&tmp);
    result.map(|()| target)
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
        fs::remove_dir_all(&dir).unwrap();
    }
}
