//! Outputs: SPICE netlists, the JSON report, engineering notation, charts
//! (SVG, PNG), the bill of materials (CSV), numeric tables (CSV) and the
//! HTML report.

pub mod bom;
pub mod csv;
pub mod eng;
pub mod html;
pub mod plot;
pub mod spice;

/// Writes `bytes` to `path` through a temporary file in the same folder
/// and a rename, so that `path` never holds a half-written file and a
/// failure leaves nothing behind.
pub fn write_atomic(path: &std::path::Path, bytes: &[u8]) -> std::io::Result<()> {
    use std::io::Write;
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(std::path::Path::new("."));
    let mut tmp = tempfile::NamedTempFile::new_in(dir)?;
    tmp.write_all(bytes)?;
    // The temporary file is created private (0600); an output is an
    // ordinary file, readable by others as one written directly would be.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file()
            .set_permissions(std::fs::Permissions::from_mode(0o644))?;
    }
    tmp.as_file().sync_all()?;
    tmp.persist(path).map_err(|e| e.error)?;
    Ok(())
}
