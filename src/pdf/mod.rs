//! TEMPORARY: replaced by the certificate renderer.
mod model;
pub use model::*;
/// Renders a certificate.
pub fn render_certificate(_doc: &CertificateDoc) -> Result<Vec<u8>, PdfError> {
    Err(PdfError::NotReady)
}
/// Rendering errors.
#[derive(Debug, thiserror::Error)]
pub enum PdfError {
    /// Not ready.
    #[error("not ready")]
    NotReady,
}
