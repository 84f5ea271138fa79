//! Checking an archive file against its manifest: every listed file present with its
//! size and SHA-256, nothing unlisted, `SHA256SUMS` in agreement. A damaged or
//! truncated zip is walked entry by entry to name the first file that cannot be read.

use std::collections::BTreeMap;
use std::io::{BufReader, Read, Seek};
use std::path::Path;

use anyhow::{Context, bail};
use sha2::{Digest, Sha256};

use super::packer::Entry;
use super::{MANIFEST, SUMS};

/// What a successful check covered.
#[derive(Debug, Clone)]
pub struct Verified {
    /// Files whose size and SHA-256 matched the manifest.
    pub files: usize,
    /// Their bytes.
    pub bytes: u64,
}

#[derive(serde::Deserialize)]
struct Manifest {
    files: Vec<Entry>,
}

/// Checks an archive file; the error names the first file at fault.
pub fn verify_file(path: &Path) -> anyhow::Result<Verified> {
    let file = std::fs::File::open(path).with_context(|| format!("opening {}", path.display()))?;
    match zip::ZipArchive::new(BufReader::new(file)) {
        Ok(zip) => verify_zip(zip),
        Err(e) => {
            let file = std::fs::File::open(path)?;
            Err(first_damaged(BufReader::new(file), &e.to_string()))
        }
    }
}

/// Checks an archive held in memory (tests and downloads).
pub fn verify_bytes(bytes: &[u8]) -> anyhow::Result<Verified> {
    match zip::ZipArchive::new(std::io::Cursor::new(bytes)) {
        Ok(zip) => verify_zip(zip),
        Err(e) => Err(first_damaged(bytes, &e.to_string())),
    }
}

/// Reads one member fully: (bytes, SHA-256).
fn digest(mut r: impl Read) -> std::io::Result<(u64, String)> {
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 64 * 1024];
    let mut n = 0u64;
    loop {
        let k = r.read(&mut buf)?;
        if k == 0 {
            break;
        }
        h.update(&buf[..k]);
        n += k as u64;
    }
    Ok((n, hex::encode(h.finalize())))
}

fn read_member<R: Read + Seek>(
    zip: &mut zip::ZipArchive<R>,
    name: &str,
) -> anyhow::Result<Vec<u8>> {
    let mut f = zip
        .by_name(name)
        .map_err(|_| anyhow::anyhow!("{name} is missing from the archive"))?;
    let mut out = Vec::new();
    f.read_to_end(&mut out)
        .map_err(|e| anyhow::anyhow!("{name} is damaged: {e}"))?;
    Ok(out)
}

fn verify_zip<R: Read + Seek>(mut zip: zip::ZipArchive<R>) -> anyhow::Result<Verified> {
    let manifest: Manifest = serde_json::from_slice(&read_member(&mut zip, MANIFEST)?)
        .map_err(|e| anyhow::anyhow!("{MANIFEST} is not a readable manifest: {e}"))?;
    let listed: BTreeMap<&str, &Entry> = manifest
        .files
        .iter()
        .map(|e| (e.path.as_str(), e))
        .collect();
    let mut bytes = 0;
    for e in &manifest.files {
        let member = zip.by_name(&e.path).map_err(|_| {
            anyhow::anyhow!(
                "{} is listed in {MANIFEST} but missing from the archive",
                e.path
            )
        })?;
        let (n, sha) =
            digest(member).map_err(|err| anyhow::anyhow!("{} is damaged: {err}", e.path))?;
        if sha != e.sha256 || n != e.bytes {
            bail!(
                "{} does not match {MANIFEST}: SHA-256 {sha} ({n} bytes), listed {} ({} bytes)",
                e.path,
                e.sha256,
                e.bytes
            );
        }
        bytes += n;
    }
    let names: Vec<String> = zip
        .file_names()
        .map(|n| n.map(|n| n.to_string()))
        .collect::<Result<_, _>>()?;
    if let Some(extra) = names
        .iter()
        .find(|n| !listed.contains_key(n.as_str()) && *n != MANIFEST && *n != SUMS)
    {
        bail!("{extra} is in the archive but not listed in {MANIFEST}");
    }
    check_sums(
        &String::from_utf8_lossy(&read_member(&mut zip, SUMS)?),
        &listed,
    )?;
    Ok(Verified {
        files: manifest.files.len(),
        bytes,
    })
}

/// `SHA256SUMS` says the same as the manifest, line for line.
fn check_sums(text: &str, listed: &BTreeMap<&str, &Entry>) -> anyhow::Result<()> {
    let mut seen = 0;
    for line in text.lines().filter(|l| !l.trim().is_empty()) {
        let (sha, name) = line
            .split_once("  ")
            .ok_or_else(|| anyhow::anyhow!("{SUMS} has a line that is not 'hash  file': {line}"))?;
        match listed.get(name) {
            Some(e) if e.sha256 == sha => seen += 1,
            _ => bail!("{SUMS} disagrees with {MANIFEST} about {name}"),
        }
    }
    if seen != listed.len() {
        bail!("{SUMS} lists {seen} files, {MANIFEST} {}", listed.len());
    }
    Ok(())
}

/// The zip's directory cannot be read (a truncated file loses it first): read the
/// entries from the start to name the first one that is cut short or damaged.
fn first_damaged(mut r: impl Read, why: &str) -> anyhow::Error {
    let mut last_whole: Option<String> = None;
    loop {
        let next = zip::read::read_zipfile_from_stream(&mut r);
        let entry = match next {
            Ok(Some(entry)) => entry,
            Ok(None) => {
                return anyhow::anyhow!(
                    "the archive's directory cannot be read ({why}); every file up to {} reads whole",
                    last_whole.as_deref().unwrap_or("the first")
                );
            }
            Err(_) => {
                return anyhow::anyhow!(
                    "the archive is cut short after {}: the file that followed it is incomplete and {MANIFEST} is missing ({why})",
                    last_whole.as_deref().unwrap_or("its start")
                );
            }
        };
        let name = entry.name().map_or_else(
            |_| "an entry with an unreadable name".to_string(),
            |n| n.to_string(),
        );
        if let Err(e) = digest(entry) {
            return anyhow::anyhow!("{name} is cut short or damaged: {e}");
        }
        last_whole = Some(name);
    }
}
