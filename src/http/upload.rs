//! Uploaded files spooled to an anonymous temporary file chunk by chunk, so an import
//! of any size never sits in memory; the import then reads the file back from disk.

use std::io::{Seek, SeekFrom};

use anyhow::Context;
use axum::body::{Body, Bytes};
use axum::extract::multipart::Field;
use futures_util::StreamExt;
use tokio::io::AsyncWriteExt;

use crate::error::{AppError, Result};

/// A finished upload: the file, rewound to its start, and how many bytes it holds.
pub struct Spooled {
    pub file: std::fs::File,
    pub bytes: u64,
}

/// An upload being written.
struct Spool {
    file: tokio::fs::File,
    bytes: u64,
}

impl Spool {
    /// A new anonymous temporary file (removed by the system when closed).
    async fn new() -> Result<Self> {
        let file = tokio::task::spawn_blocking(tempfile::tempfile)
            .await
            .context("creating the upload file")?
            .context("creating the upload file")?;
        Ok(Self {
            file: tokio::fs::File::from_std(file),
            bytes: 0,
        })
    }

    async fn write(&mut self, chunk: &[u8]) -> Result<()> {
        self.file
            .write_all(chunk)
            .await
            .context("writing the upload file")?;
        self.bytes += chunk.len() as u64;
        Ok(())
    }

    async fn finish(mut self) -> Result<Spooled> {
        self.file.flush().await.context("writing the upload file")?;
        let mut file = self.file.into_std().await;
        file.seek(SeekFrom::Start(0))
            .context("rewinding the upload file")?;
        Ok(Spooled {
            file,
            bytes: self.bytes,
        })
    }
}

/// Why an upload stopped before its end, as the user should read it.
fn cut_short(field: &str, detail: impl std::fmt::Display) -> AppError {
    AppError::BadRequest {
        field: field.to_string(),
        message: format!(
            "the upload did not arrive whole (too large for an import, or the connection broke off): {detail}"
        ),
    }
}

/// Spools a whole request body (the body limit of the route still applies).
pub async fn spool_body(body: Body, field: &str) -> Result<Spooled> {
    let mut spool = Spool::new().await?;
    let mut stream = body.into_data_stream();
    while let Some(chunk) = stream.next().await {
        let chunk: Bytes = chunk.map_err(|e| cut_short(field, e))?;
        spool.write(&chunk).await?;
    }
    spool.finish().await
}

/// Spools one part of a `multipart/form-data` body.
pub async fn spool_field(mut part: Field<'_>, field: &str) -> Result<Spooled> {
    let mut spool = Spool::new().await?;
    while let Some(chunk) = part
        .chunk()
        .await
        .map_err(|e| cut_short(field, e.body_text()))?
    {
        spool.write(&chunk).await?;
    }
    spool.finish().await
}
