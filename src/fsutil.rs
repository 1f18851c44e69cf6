//! File output shared by every stage. Atomic writes: write to a temporary file in the target's folder,
//! then rename it over the target, so a reader never sees half a file.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::Path;

/// Write `bytes` to `path` atomically.
pub(crate) fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".to_string());
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp).map_err(|e| Error::io("cannot create", &tmp, e))?;
        f.write_all(bytes)
            .map_err(|e| Error::io("cannot write", &tmp, e))?;
        f.sync_all()
            .map_err(|e| Error::io("cannot write", &tmp, e))?;
        std::fs::rename(&tmp, path).map_err(|e| Error::io("cannot write", path, e))
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_and_replaces() {
        let dir = std::env::temp_dir().join(format!("tactread-write-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("out.txt");
        write_atomic(&p, b"one").unwrap();
        write_atomic(&p, b"two").unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "two");
        let leftovers = std::fs::read_dir(&dir).unwrap().count();
        assert_eq!(leftovers, 1);
        assert!(write_atomic(&dir.join("no/such/dir/x"), b"x").is_err());
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
