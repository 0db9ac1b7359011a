//! Writing images to FITS files with the `fitsio` crate (CFITSIO).
//!
//! Files are written under a temporary name in the target's folder and renamed once complete,
//! so a reader never sees a half-written file. An existing target is replaced only when
//! `force` is set. The header's cards are copied verbatim (as 80-character card images) into
//! the primary HDU, except the structural keywords that CFITSIO writes itself (SIMPLE, BITPIX,
//! NAXIS, NAXISn, EXTEND, END; FITS Standard 4.0, section 4.4.1).

use crate::header::Header;
use fitsio::FitsFile;
use fitsio::images::{ImageDescription, ImageType, WriteImage};
use ndarray::ArrayView2;
use std::fmt;
use std::path::{Path, PathBuf};

/// A failure to write a FITS file; the message names the file.
#[derive(Debug, Clone, PartialEq)]
pub struct FitsWriteError(pub String);

impl fmt::Display for FitsWriteError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for FitsWriteError {}

/// Writes a 32-bit float image (BITPIX = -32); NaN pixels stay NaN. `data` has rows = y
/// (NAXIS2) and columns = x (NAXIS1).
pub fn write_image_f32(
    path: &Path,
    data: ArrayView2<f32>,
    header: &Header,
    force: bool,
) -> Result<(), FitsWriteError> {
    write_image(path, data, ImageType::Float, header, force)
}

/// Writes a 32-bit integer image (BITPIX = 32), e.g. a label map.
pub fn write_image_i32(
    path: &Path,
    data: ArrayView2<i32>,
    header: &Header,
    force: bool,
) -> Result<(), FitsWriteError> {
    write_image(path, data, ImageType::Long, header, force)
}

fn is_structural(key: &str) -> bool {
    matches!(key, "SIMPLE" | "BITPIX" | "NAXIS" | "EXTEND" | "END")
        || key
            .strip_prefix("NAXIS")
            .is_some_and(|r| !r.is_empty() && r.bytes().all(|b| b.is_ascii_digit()))
}

fn temp_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!(".{name}.part-{}", std::process::id()))
}

fn write_image<T: WriteImage + Copy>(
    path: &Path,
    data: ArrayView2<T>,
    kind: ImageType,
    header: &Header,
    force: bool,
) -> Result<(), FitsWriteError> {
    let shown = path.display();
    if path.exists() && !force {
        return Err(FitsWriteError(format!(
            "{shown} already exists; not overwriting it (use --force to replace it)"
        )));
    }
    let (ny, nx) = data.dim();
    let tmp = temp_path(path);
    let _ = std::fs::remove_file(&tmp);
    let fail = |what: &str, e: &dyn fmt::Display| {
        FitsWriteError(format!("cannot write {shown}: {what}: {e}"))
    };
    let result = (|| {
        let desc = ImageDescription {
            data_type: kind,
            dimensions: &[ny, nx],
        };
        let mut f = FitsFile::create(&tmp)
            .with_custom_primary(&desc)
            .open()
            .map_err(|e| fail("creating the file", &e))?;
        let hdu = f
            .primary_hdu()
            .map_err(|e| fail("opening the primary HDU", &e))?;
        // The fitsio crate names the primary HDU EXTNAME = '_PRIMARY'; drop that card so the
        // file holds only the caller's header (status 202 = keyword not found is fine).
        let mut status = 0;
        let extname = c"EXTNAME";
        // SAFETY: the pointer comes from an open FitsFile; `extname` is NUL-terminated.
        unsafe {
            fitsio::sys::ffdkey(f.as_raw(), extname.as_ptr(), &mut status);
        }
        for (card, image) in header.cards().iter().zip(header.to_card_images()) {
            if is_structural(&card.key) {
                continue;
            }
            let c = std::ffi::CString::new(image).map_err(|e| fail("card with a NUL byte", &e))?;
            let mut status = 0;
            // SAFETY: the pointer comes from an open FitsFile that outlives this call, and
            // `c` is a NUL-terminated card image of at most 80 characters.
            unsafe {
                fitsio::sys::ffprec(f.as_raw(), c.as_ptr(), &mut status);
            }
            if status != 0 {
                return Err(FitsWriteError(format!(
                    "cannot write {shown}: CFITSIO status {status} writing card {}",
                    card.key
                )));
            }
        }
        // Write straight from the array when it is contiguous (no copy of the pixels).
        let owned: Vec<T>;
        let flat: &[T] = match data.as_slice() {
            Some(s) => s,
            None => {
                owned = data.iter().copied().collect();
                &owned
            }
        };
        hdu.write_image(&mut f, flat)
            .map_err(|e| fail("writing the pixels", &e))?;
        drop(f);
        std::fs::rename(&tmp, path).map_err(|e| fail("renaming the temporary file", &e))
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::header::Value;
    use ndarray::Array2;

    #[test]
    fn round_trip_keeps_values_nan_and_keywords() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("img.fits");
        let mut data = Array2::<f32>::from_shape_fn((3, 5), |(y, x)| (10 * y + x) as f32 + 0.25);
        data[[1, 2]] = f32::NAN;
        let mut h = Header::new();
        h.set("NAXIS1", Value::Int(99), "must be ignored");
        h.set("BUNIT", Value::Str("MJy/sr".into()), "");
        h.set("CDELT1", Value::Float(-1.0 / 720.0), "deg");
        h.set("CTYPE1", Value::Str("RA---TAN".into()), "");
        write_image_f32(&path, data.view(), &h, false).unwrap();

        let mut f = FitsFile::open(&path).unwrap();
        let hdu = f.primary_hdu().unwrap();
        let back: Vec<f32> = hdu.read_image(&mut f).unwrap();
        assert_eq!(back.len(), 15);
        for (a, b) in back.iter().zip(data.iter()) {
            assert!(a == b || (a.is_nan() && b.is_nan()), "{a} vs {b}");
        }
        assert!(back[7].is_nan());
        assert_eq!(hdu.read_key::<i64>(&mut f, "NAXIS1").unwrap(), 5);
        assert_eq!(hdu.read_key::<i64>(&mut f, "NAXIS2").unwrap(), 3);
        assert_eq!(hdu.read_key::<String>(&mut f, "BUNIT").unwrap(), "MJy/sr");
        assert_eq!(
            hdu.read_key::<String>(&mut f, "CTYPE1").unwrap(),
            "RA---TAN"
        );
        assert!(
            hdu.read_key::<String>(&mut f, "EXTNAME").is_err(),
            "no EXTNAME added"
        );
        assert_eq!(hdu.read_key::<f64>(&mut f, "CDELT1").unwrap(), -1.0 / 720.0);

        // An existing file is refused without force, with a sentence naming it.
        let err = write_image_f32(&path, data.view(), &h, false).unwrap_err();
        assert!(
            err.0.contains("img.fits") && err.0.contains("--force"),
            "{err}"
        );
        // ... and replaced with force.
        let labels = Array2::<i32>::from_shape_fn((2, 2), |(y, x)| (y * 2 + x) as i32);
        write_image_i32(&path, labels.view(), &Header::new(), true).unwrap();
        let mut f = FitsFile::open(&path).unwrap();
        let hdu = f.primary_hdu().unwrap();
        let back: Vec<i32> = hdu.read_image(&mut f).unwrap();
        assert_eq!(back, vec![0, 1, 2, 3]);
        assert_eq!(hdu.read_key::<i64>(&mut f, "BITPIX").unwrap(), 32);
        // No temporary file is left behind.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
