//! Writing files into the zip while hashing them, then the manifest and `SHA256SUMS`.

use std::io::{Read, Seek, Write};

use serde::{Deserialize, Serialize};
use serde_json::json;
use sha2::{Digest, Sha256};
use zip::CompressionMethod;
use zip::write::SimpleFileOptions;

use super::{FORMAT_VERSION, MANIFEST, SUMS};
use crate::db;
use crate::error::{AppError, Result};

/// One file of the archive as the manifest lists it.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq, Eq)]
pub struct Entry {
    pub path: String,
    pub bytes: u64,
    pub sha256: String,
    pub description: String,
}

/// A zip being written, with the entries written so far.
pub struct Packer<W: Write + Seek> {
    zip: zip::ZipWriter<W>,
    entries: Vec<Entry>,
}

fn io(e: impl Into<anyhow::Error>) -> AppError {
    AppError::Internal(e.into())
}

/// Counts and hashes what passes through on its way into the zip.
struct Hashing<'a, W: Write> {
    inner: &'a mut W,
    hash: Sha256,
    bytes: u64,
}

impl<W: Write> Write for Hashing<'_, W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.inner.write(buf)?;
        self.hash.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush()
    }
}

impl<W: Write + Seek> Packer<W> {
    /// Starts an empty archive.
    pub fn new(out: W) -> Self {
        Self {
            zip: zip::ZipWriter::new(out),
            entries: Vec::new(),
        }
    }

    /// The files written so far.
    pub fn entries(&self) -> &[Entry] {
        &self.entries
    }

    /// Adds a file from a reader; PDFs (already compressed) are stored, text deflated.
    pub fn add_from(&mut self, path: &str, description: &str, mut from: impl Read) -> Result<()> {
        let method = if path.ends_with(".pdf") {
            CompressionMethod::Stored
        } else {
            CompressionMethod::Deflated
        };
        let options = SimpleFileOptions::default()
            .compression_method(method)
            .large_file(false);
        self.zip.start_file(path, options).map_err(io)?;
        let mut h = Hashing {
            inner: &mut self.zip,
            hash: Sha256::new(),
            bytes: 0,
        };
        std::io::copy(&mut from, &mut h).map_err(io)?;
        let (hash, bytes) = (h.hash, h.bytes);
        self.entries.push(Entry {
            path: path.to_string(),
            bytes,
            sha256: hex::encode(hash.finalize()),
            description: description.to_string(),
        });
        Ok(())
    }

    /// Adds a file from bytes in memory.
    pub fn add_bytes(&mut self, path: &str, description: &str, bytes: &[u8]) -> Result<()> {
        self.add_from(path, description, bytes)
    }

    /// Adds a text file.
    pub fn add_text(&mut self, path: &str, description: &str, text: &str) -> Result<()> {
        self.add_bytes(path, description, text.as_bytes())
    }

    /// Adds a JSON file, pretty-printed so a person can read it.
    pub fn add_json(
        &mut self,
        path: &str,
        description: &str,
        value: &impl Serialize,
    ) -> Result<()> {
        let bytes = serde_json::to_vec_pretty(value).map_err(io)?;
        self.add_bytes(path, description, &bytes)
    }

    /// Writes the manifest and `SHA256SUMS` last and closes the zip.
    pub fn finish(mut self, project: &db::projects::Project, made_by: &str) -> Result<W> {
        let manifest = json!({
            "format": "liftledger handover archive",
            "format_version": FORMAT_VERSION,
            "made_by": made_by,
            "made_at": crate::clock::now(),
            "liftledger_version": env!("CARGO_PKG_VERSION"),
            "project": {
                "code": project.code, "name": project.name, "contract": project.contract,
                "client": project.client, "contractor": project.contractor,
            },
            "files": self.entries,
        });
        let sums: String = self
            .entries
            .iter()
            .map(|e| format!("{}  {}\n", e.sha256, e.path))
            .collect();
        let options = SimpleFileOptions::default().compression_method(CompressionMethod::Deflated);
        self.zip.start_file(SUMS, options).map_err(io)?;
        self.zip.write_all(sums.as_bytes()).map_err(io)?;
        self.zip.start_file(MANIFEST, options).map_err(io)?;
        let bytes = serde_json::to_vec_pretty(&manifest).map_err(io)?;
        self.zip.write_all(&bytes).map_err(io)?;
        self.zip.finish().map_err(io)
    }
}
