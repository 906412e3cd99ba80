//! From guesses to the study file: files whose guesses agree grouped into one
//! block, and each group written as a `[[logs]]` block with its comments.

use super::{Entry, FileGuess, detect_file, q};
use crate::io::error::IoError;
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

/// A group of files with one guessed block.
#[derive(Debug, Clone)]
pub struct Group {
    /// The files, sorted.
    pub files: Vec<PathBuf>,
    /// The guess of the first file (its comments quote that file).
    pub guess: FileGuess,
    /// Undecided items of every file of the group, each once.
    pub undecided: Vec<String>,
}

/// Put files with the same guesses into one group, in order of first file.
pub fn group(guesses: Vec<FileGuess>) -> Vec<Group> {
    let mut out: Vec<(String, Group)> = Vec::new();
    for g in guesses {
        let sig = g.signature();
        match out.iter_mut().find(|(s, _)| *s == sig) {
            Some((_, grp)) => {
                grp.files.push(g.path.clone());
                for u in g.undecided {
                    if !grp.undecided.contains(&u) {
                        grp.undecided.push(u);
                    }
                }
            }
            None => {
                let grp = Group { files: vec![g.path.clone()], undecided: g.undecided.clone(), guess: g };
                out.push((sig, grp));
            }
        }
    }
    out.into_iter().map(|(_, g)| g).collect()
}

/// `path` relative to `base` (both made absolute), with `..` where needed,
/// written with `/`.
pub fn relative(path: &Path, base: &Path) -> String {
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let (p, b) = (abs(path), abs(base));
    let pc: Vec<_> = p.components().collect();
    let bc: Vec<_> = b.components().collect();
    let common = pc.iter().zip(&bc).take_while(|(a, b)| a == b).count();
    let mut parts: Vec<String> = vec!["..".into(); bc.len() - common];
    parts.extend(pc[common..].iter().map(|c| c.as_os_str().to_string_lossy().into_owned()));
    parts.join("/")
}

/// The `files` value of a group: `dir/*.ext` when that glob matches exactly
/// the group's files, else the list of files.
fn files_value(files: &[PathBuf], base: &Path) -> (String, String) {
    let rel: Vec<String> = files.iter().map(|f| relative(f, base)).collect();
    let parent = files[0].parent().map(Path::to_path_buf).unwrap_or_default();
    let ext = files[0].extension().map(|e| e.to_string_lossy().into_owned());
    if files.len() > 1
        && let Some(ext) = ext
        && files.iter().all(|f| {
            f.parent() == Some(parent.as_path())
                && f.extension().map(|e| e.to_string_lossy().into_owned()).as_ref() == Some(&ext)
        })
    {
        let pat = parent.join(format!("*.{}", glob::Pattern::escape(&ext)));
        let matched: BTreeSet<PathBuf> =
            glob::glob(&glob::Pattern::escape(&parent.to_string_lossy()).to_string())
                .ok()
                .and_then(|_| {
                    glob::glob(&format!(
                        "{}/*.{}",
                        glob::Pattern::escape(&parent.to_string_lossy()),
                        glob::Pattern::escape(&ext)
                    ))
                    .ok()
                })
                .map(|it| {
                    it.filter_map(|p| p.ok())
                        .filter(|p| p.is_file())
                        .map(|p| std::path::absolute(&p).unwrap_or(p))
                        .collect()
                })
                .unwrap_or_default();
        let ours: BTreeSet<PathBuf> =
            files.iter().map(|p| std::path::absolute(p).unwrap_or_else(|_| p.clone())).collect();
        if matched == ours {
            let rel_pat = relative(&pat, base);
            let rel_dir = rel_pat
                .rsplit_once('/')
                .map(|(d, _)| glob::Pattern::escape(d))
                .map(|d| format!("{d}/"))
                .unwrap_or_default();
            return (
                format!("[{}]", q(&format!("{rel_dir}*.{}", glob::Pattern::escape(&ext)))),
                format!("every .{ext} file of the folder"),
            );
        }
    }
    let list: Vec<String> = rel.iter().map(|r| q(&glob::Pattern::escape(r))).collect();
    (format!("[{}]", list.join(", ")), String::new())
}

/// Write the `[[logs]]` block of a group; paths relative to `base` (the
/// study file's folder).
pub fn render(grp: &Group, base: &Path) -> String {
    let g = &grp.guess;
    let mut out = String::new();
    let names: Vec<String> = grp.files.iter().map(|f| relative(f, base)).collect();
    let shown = if names.len() > 4 {
        format!("{}, ... ({} files)", names[..4].join(", "), names.len())
    } else {
        names.join(", ")
    };
    out.push_str(&format!("# Detected from {shown}; comments quote {}.\n", names[0]));
    out.push_str("[[logs]]\n");
    let (files, why) = files_value(&grp.files, base);
    out.push_str(&format!(
        "files = {files}{}\n",
        if why.is_empty() { String::new() } else { format!("  # {why}") }
    ));
    let entry = |out: &mut String, e: &Entry| match &e.value {
        Some(v) => out.push_str(&format!("{} = {v}  # {}\n", e.key, e.why)),
        None => {
            out.push_str(&format!("# UNDECIDED ({}): {}\n", e.key, e.why));
            for c in &e.choices {
                out.push_str(&format!("# {} = {c}\n", e.key));
            }
        }
    };
    for e in &g.keys {
        entry(&mut out, e);
    }
    for n in &g.notes {
        out.push_str(&format!("# {n}\n"));
    }
    if !g.columns.is_empty() {
        out.push_str("[logs.columns]\n");
        let mut seen_why: Vec<&str> = Vec::new();
        for e in &g.columns {
            if e.value.is_none() && seen_why.contains(&e.why.as_str()) {
                for c in &e.choices {
                    out.push_str(&format!("# {} = {c}\n", e.key));
                }
                continue;
            }
            seen_why.push(&e.why);
            entry(&mut out, e);
        }
    }
    out
}

/// Detect every file, group them and write the blocks; files that match
/// nothing are returned as errors (the others are still written).
pub fn suggest(files: &[PathBuf], base: &Path) -> (String, Vec<Group>, Vec<IoError>) {
    let mut guesses = Vec::new();
    let mut errors = Vec::new();
    for f in files {
        match detect_file(f) {
            Ok(g) => guesses.push(g),
            Err(e) => errors.push(e),
        }
    }
    let groups = group(guesses);
    let text = groups.iter().map(|g| render(g, base)).collect::<Vec<_>>().join("\n");
    (text, groups, errors)
}
