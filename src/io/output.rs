//! Atomic output: a stage writes all its files into a hidden staging folder
//! inside the output folder, and only when every file is complete are they
//! renamed into place (a rename within one file system is atomic). A stage
//! that fails leaves the previous outputs untouched and no half-written file
//! under a final name. Dropping an uncommitted [`StageWriter`] removes the
//! staging folder.

use super::error::{IoError, Result};
use std::path::{Path, PathBuf};

/// Collects the files of one stage and publishes them together.
#[derive(Debug)]
pub struct StageWriter {
    out: PathBuf,
    staging: PathBuf,
    files: Vec<String>,
    committed: bool,
}

impl StageWriter {
    /// Create the output folder if needed and a fresh staging folder in it,
    /// named after the stage.
    pub fn new(out: &Path, stage: &str) -> Result<StageWriter> {
        std::fs::create_dir_all(out).map_err(|source| IoError::Read { path: out.to_path_buf(), source })?;
        let staging = out.join(format!(".{stage}.partial-{}", std::process::id()));
        if staging.exists() {
            let _ = std::fs::remove_dir_all(&staging);
        }
        std::fs::create_dir_all(&staging)
            .map_err(|source| IoError::Read { path: staging.clone(), source })?;
        Ok(StageWriter { out: out.to_path_buf(), staging, files: Vec::new(), committed: false })
    }

    /// The staging path for output file `name` (a plain file name, or a
    /// relative path such as `figures/map.svg`). Write the file there; it is
    /// published by [`StageWriter::commit`].
    pub fn path(&mut self, name: &str) -> PathBuf {
        let p = self.staging.join(name);
        if let Some(parent) = p.parent() {
            let _ = std::fs::create_dir_all(parent);
        }
        if !self.files.iter().any(|f| f == name) {
            self.files.push(name.to_string());
        }
        p
    }

    /// Write a whole file from bytes.
    pub fn write(&mut self, name: &str, bytes: &[u8]) -> Result<()> {
        let p = self.path(name);
        std::fs::write(&p, bytes).map_err(|source| IoError::Read { path: p, source })
    }

    /// The folder the files will be published to.
    pub fn output_dir(&self) -> &Path {
        &self.out
    }

    /// Rename every staged file into the output folder, then remove the
    /// staging folder. Returns the published paths.
    pub fn commit(mut self) -> Result<Vec<PathBuf>> {
        let mut published = Vec::new();
        for name in &self.files {
            let from = self.staging.join(name);
            if !from.exists() {
                return Err(IoError::Table {
                    path: from,
                    message: "an output file was announced but never written".into(),
                });
            }
            let to = self.out.join(name);
            if let Some(parent) = to.parent() {
                std::fs::create_dir_all(parent)
                    .map_err(|source| IoError::Read { path: parent.to_path_buf(), source })?;
            }
            std::fs::rename(&from, &to).map_err(|source| IoError::Read { path: to.clone(), source })?;
            published.push(to);
        }
        let _ = std::fs::remove_dir_all(&self.staging);
        self.committed = true;
        Ok(published)
    }
}

impl Drop for StageWriter {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.staging);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn files_appear_only_on_commit() {
        let d = tempfile::tempdir().unwrap();
        let mut w = StageWriter::new(d.path(), "ingest").unwrap();
        w.write("a.csv", b"x\n1\n").unwrap();
        w.write("sub/b.csv", b"y\n").unwrap();
        assert!(!d.path().join("a.csv").exists());
        let published = w.commit().unwrap();
        assert_eq!(published.len(), 2);
        assert_eq!(std::fs::read_to_string(d.path().join("a.csv")).unwrap(), "x\n1\n");
        assert!(d.path().join("sub/b.csv").exists());
        let leftovers: Vec<_> = std::fs::read_dir(d.path())
            .unwrap()
            .filter(|e| e.as_ref().unwrap().file_name().to_string_lossy().starts_with('.'))
            .collect();
        assert!(leftovers.is_empty());
    }

    #[test]
    fn dropped_writer_leaves_nothing() {
        let d = tempfile::tempdir().unwrap();
        std::fs::write(d.path().join("a.csv"), "old\n").unwrap();
        {
            let mut w = StageWriter::new(d.path(), "ingest").unwrap();
            w.write("a.csv", b"new\n").unwrap();
        }
        assert_eq!(std::fs::read_to_string(d.path().join("a.csv")).unwrap(), "old\n");
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }
}
