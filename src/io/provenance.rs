//! Provenance of a run's inputs: every file the study read (the study file,
//! the pot and sensor tables, every logger export ingested) with its size and
//! SHA-256 digest, so that a report can say exactly which data it was made
//! from. The report copies these; it never reads an input file itself.

use super::ingest::Ingested;
use super::study::Study;
use sha2::{Digest, Sha256};
use std::path::Path;

/// One input file of a run.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct InputFile {
    /// Path relative to the study folder when inside it, else as given.
    pub path: String,
    /// Size in bytes.
    pub bytes: u64,
    /// SHA-256 of the contents, 64 lowercase hex digits (FIPS 180-4).
    pub sha256: String,
}

/// Size and SHA-256 of the file at `path`, shown relative to the study
/// folder; `None` when it cannot be read (the stage that needed it has
/// already reported that). Cost: one read of the file, O(bytes).
pub fn input_file(study: &Study, path: &Path) -> Option<InputFile> {
    let bytes = std::fs::read(path).ok()?;
    let shown = path.strip_prefix(&study.dir).unwrap_or(path).display().to_string();
    Some(InputFile {
        path: shown,
        bytes: bytes.len() as u64,
        sha256: Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect(),
    })
}

/// Every input of a run, in reading order: the study file, the pot table,
/// the sensor table (if any) and, when ingestion ran, every logger export it
/// read.
pub fn input_files(study: &Study, ing: Option<&Ingested>) -> Vec<InputFile> {
    let mut inputs = Vec::new();
    inputs.extend(input_file(study, &study.path));
    inputs.extend(input_file(study, &study.resolve(&study.spec.pots.file)));
    if let Some(s) = &study.spec.sensors {
        inputs.extend(input_file(study, &study.resolve(&s.file)));
    }
    if let Some(ing) = ing {
        for f in &ing.files {
            inputs.extend(input_file(study, &f.path));
        }
    }
    inputs
}

#[cfg(test)]
mod tests {
    use super::*;

    /// SHA-256 of "abc": FIPS 180-2, Appendix B.1 (the standard's own example).
    #[test]
    fn input_checksum_matches_the_standard_example() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("study.toml");
        std::fs::write(
            &p,
            "[study]\ntitle = \"t\"\ntimezone = \"UTC\"\noutput = \"out\"\n[pots]\nfile = \"pots.csv\"\nid = \"pot\"\nx = \"x\"\ny = \"y\"\n",
        )
        .unwrap();
        let study = Study::load(&p).unwrap();
        std::fs::write(d.path().join("abc.txt"), "abc").unwrap();
        let f = input_file(&study, &d.path().join("abc.txt")).unwrap();
        assert_eq!(f.sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
        assert_eq!(f.bytes, 3);
        assert_eq!(f.path, "abc.txt");
        // The study file itself is the first input; the pot table is absent
        // here, so it is left out rather than invented.
        let all = input_files(&study, None);
        assert_eq!(all.len(), 1);
        assert_eq!(all[0].path, "study.toml");
    }
}
