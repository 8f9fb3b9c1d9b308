//! `.sigmf` archives: an uncompressed tar holding `NAME/NAME.sigmf-meta` and its dataset
//! (`NAME/NAME.sigmf-data`, or the file its `core:dataset` names), as the SigMF specification
//! defines. Nothing is extracted: the dataset is read where it lies inside the tar.

use super::meta::{parse_meta, read_capped};
use super::{dataset_path, Located};
use crate::source::sanitize;
use anyhow::{bail, Context, Result};
use std::fs::File;
use std::path::{Component, Path, PathBuf};

/// A regular file in the archive: its normalised path, first byte and size.
struct Member {
    name: String,
    at: u64,
    size: u64,
}

pub(super) fn locate(path: &str) -> Result<Located> {
    let label = sanitize(path);
    let not_tar = |e: std::io::Error| {
        anyhow::anyhow!(
            "'{label}' is not a readable .sigmf archive ({e}); a SigMF archive is an uncompressed tar of NAME/NAME.sigmf-meta and NAME/NAME.sigmf-data: check the file, or extract it and open the .sigmf-meta"
        )
    };
    let file = File::open(path).with_context(|| format!("cannot open SigMF archive '{label}'"))?;
    let mut tar = tar::Archive::new(file);
    let mut members = Vec::new();
    let mut metas = Vec::new();
    for entry in tar.entries().map_err(not_tar)? {
        let mut entry = entry.map_err(not_tar)?;
        if !entry.header().entry_type().is_file() {
            continue;
        }
        let name = normalise(&entry.path().map_err(not_tar)?);
        let member = Member { name, at: entry.raw_file_position(), size: entry.size() };
        if member.name.ends_with(".sigmf-meta") {
            let shown = format!("{label}:{}", sanitize(&member.name));
            let text = read_capped(&mut entry, Some(member.size), &shown)?;
            metas.push((member.name.clone(), shown, text));
        }
        members.push(member);
    }
    let (meta_name, meta_label, text) = match metas.len() {
        1 => metas.remove(0),
        0 => bail!(
            "'{label}' holds no .sigmf-meta file; a SigMF archive is a tar of NAME/NAME.sigmf-meta and NAME/NAME.sigmf-data: check how it was made"
        ),
        n => bail!(
            "'{label}' holds {n} recordings ({}); bandwarden reads an archive of one recording: extract it (tar -xf) and open one .sigmf-meta",
            metas.iter().map(|m| sanitize(&m.0)).collect::<Vec<_>>().join(", ")
        ),
    };
    let meta = parse_meta(&text, &meta_label)?;
    let dir = Path::new(&meta_name).parent().unwrap_or(Path::new(""));
    let data_name = match &meta.dataset {
        Some(ds) => normalise(&dir.join(dataset_path(ds, &meta_label)?)),
        None => format!("{}.sigmf-data", meta_name.trim_end_matches(".sigmf-meta")),
    };
    let Some(data) = members.iter().find(|m| m.name == data_name) else {
        bail!(
            "'{label}' holds '{}' but not its dataset '{}': the archive is incomplete; remake it with both files",
            sanitize(&meta_name),
            sanitize(&data_name)
        );
    };
    Ok(Located {
        data_label: format!("{label}:{}", sanitize(&data.name)),
        meta_label,
        meta,
        data_file: PathBuf::from(path),
        data_base: data.at,
        data_len: data.size,
    })
}

/// `./a/b` and `a/b` alike, with `/` separators.
fn normalise(p: &Path) -> String {
    p.components()
        .filter_map(|c| match c {
            Component::Normal(s) => Some(s.to_string_lossy().into_owned()),
            _ => None,
        })
        .collect::<Vec<_>>()
        .join("/")
}
