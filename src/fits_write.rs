//! Writing images to FITS files.
//!
//! Files are written under a temporary name in the target's folder and renamed once complete,
//! so a reader never sees a half-written file. An existing target is replaced only when
//! `force` is set. The header's cards are copied verbatim (as 80-character card images) into
//! the primary HDU after the structural keywords (SIMPLE, BITPIX, NAXIS, NAXISn, EXTEND; FITS
//! Standard 4.0, section 4.4.1), which are written here, as are the big-endian pixels.
//!
//! The files are exactly those CFITSIO writes for the same image and cards (a unit test
//! compares them byte for byte with files written through the `fitsio` crate), but in a few
//! large writes or, for large images on Linux, through a mapping of the file filled by all
//! threads: CFITSIO passes the pixels through its 2880-byte buffers, several hundred system
//! calls for a 1024 x 1024 label map, which took about twice as long. Tables and all reading
//! stay with CFITSIO.

use crate::header::Header;
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
    write_image(path, data, header, force, MAPPED_BYTES)
}

/// Writes a 32-bit integer image (BITPIX = 32), e.g. a label map.
pub fn write_image_i32(
    path: &Path,
    data: ArrayView2<i32>,
    header: &Header,
    force: bool,
) -> Result<(), FitsWriteError> {
    write_image(path, data, header, force, MAPPED_BYTES)
}

fn is_structural(key: &str) -> bool {
    matches!(key, "SIMPLE" | "BITPIX" | "NAXIS" | "EXTEND" | "END")
        || key
            .strip_prefix("NAXIS")
            .is_some_and(|r| !r.is_empty() && r.bytes().all(|b| b.is_ascii_digit()))
}

/// A temporary name beside `path` of its own: `.NAME.part-PID-K`, K counting the images this
/// process has begun, so that two images begun for one target never share a file.
fn temp_path(path: &Path) -> PathBuf {
    static BEGUN: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let k = BEGUN.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!(".{name}.part-{}-{k}", std::process::id()))
}

/// A pixel type of an image HDU: its BITPIX and its big-endian bytes.
trait Pixel: Copy + Sync {
    const BITPIX: i64;
    fn be_bytes(self) -> [u8; 4];
}

impl Pixel for f32 {
    const BITPIX: i64 = -32;
    #[inline]
    fn be_bytes(self) -> [u8; 4] {
        self.to_bits().to_be_bytes()
    }
}

impl Pixel for i32 {
    const BITPIX: i64 = 32;
    #[inline]
    fn be_bytes(self) -> [u8; 4] {
        self.to_be_bytes()
    }
}

/// Bytes of a FITS block (FITS Standard 4.0, section 3.1).
const BLOCK: usize = 2880;
/// Pixels converted and written per system call.
const PIECE_PIXELS: usize = 1 << 16;

/// A fixed-format card (FITS Standard 4.0, section 4.2): the value right-justified in
/// columns 11-30, then ` / ` and the comment.
fn fixed_card(key: &str, value: &str, comment: &str) -> String {
    format!("{:<80}", format!("{key:<8}= {value:>20} / {comment}"))
}

/// The primary header as CFITSIO writes it for a new image (the mandatory keywords with its
/// comments and its two COMMENT cards citing the FITS paper), then the caller's cards, `END`
/// and blanks to the end of the block.
fn header_bytes(
    header: &Header,
    bitpix: i64,
    nx: usize,
    ny: usize,
    shown: &dyn fmt::Display,
) -> Result<Vec<u8>, FitsWriteError> {
    let mut cards = vec![
        fixed_card("SIMPLE", "T", "file does conform to FITS standard"),
        fixed_card(
            "BITPIX",
            &bitpix.to_string(),
            "number of bits per data pixel",
        ),
        fixed_card("NAXIS", "2", "number of data axes"),
        fixed_card("NAXIS1", &nx.to_string(), "length of data axis 1"),
        fixed_card("NAXIS2", &ny.to_string(), "length of data axis 2"),
        fixed_card("EXTEND", "T", "FITS dataset may contain extensions"),
        format!(
            "{:<80}",
            "COMMENT   FITS (Flexible Image Transport System) format is defined in 'Astronomy"
        ),
        format!(
            "{:<80}",
            "COMMENT   and Astrophysics', volume 376, page 359; bibcode: 2001A&A...376..359H"
        ),
    ];
    for card in header.cards() {
        if is_structural(&card.key) {
            continue;
        }
        // A long string takes CONTINUE cards after its own (section 4.2.1.2).
        for image in crate::header::card_images(card) {
            // Only printable ASCII may appear in a header (section 4.1.1).
            if image.len() != 80 || !image.bytes().all(|b| (32..=126).contains(&b)) {
                return Err(FitsWriteError(format!(
                    "cannot write {shown}: card {} holds characters FITS does not allow in a header",
                    card.key
                )));
            }
            cards.push(image);
        }
    }
    cards.push(format!("{:<80}", "END"));
    let mut bytes = cards.concat().into_bytes();
    bytes.resize(bytes.len().div_ceil(BLOCK) * BLOCK, b' ');
    Ok(bytes)
}

/// Writes the primary image HDU itself: the header ([`header_bytes`]), then the pixels in
/// big-endian order, then zeros to the end of the block; large images through a mapping of the
/// file filled by all threads ([`mapping`], [`fill`]), others a large piece at a time
/// ([`write_in_pieces`]). The bytes are those CFITSIO writes for the same image and cards (a
/// test compares them, both ways), in a few dozen system calls where CFITSIO makes one per few
/// of its 2880-byte buffers (hundreds for a 1024 x 1024 label map). The file is mapped for
/// images of at least `mapped_from` bytes of pixels ([`MAPPED_BYTES`] but in tests).
fn write_image<T: Pixel>(
    path: &Path,
    data: ArrayView2<T>,
    header: &Header,
    force: bool,
    mapped_from: usize,
) -> Result<(), FitsWriteError> {
    let (ny, nx) = data.dim();
    begin::<T>(path, ny, nx, header, force, mapped_from, false)?.finish(data)
}

/// An image file begun before its pixels are known: its temporary file made and, for a large
/// image on Linux, the file's blocks reserved and its pages made ready through a mapping, so
/// that finishing it later only converts the pixels. Begun by [`begin_image_i32`] (for
/// example on a core left idle while the pixels are computed: making the pages ready is most
/// of the time a large image takes to write on some machines), finished by
/// [`ImageFile::finish_i32`]. Dropped unfinished, it removes its temporary file.
pub struct ImageFile {
    path: PathBuf,
    tmp: PathBuf,
    bitpix: i64,
    dims: (usize, usize),
    head: Vec<u8>,
    file: Option<std::fs::File>,
    #[cfg(target_os = "linux")]
    map: Option<memmap2::MmapMut>,
    finished: bool,
}

/// Begins a 32-bit integer image (a label map) of `ny` rows and `nx` columns at `path` with
/// the cards of `header`, its pages made ready now (see [`ImageFile`]); refuses an existing
/// `path` unless `force`. That check is made now: finishing renames the file over whatever
/// lies at `path` then, so a caller that must not replace a file made meanwhile writes to a
/// name of its own (as `segment` does, to its outputs' temporary names).
pub fn begin_image_i32(
    path: &Path,
    ny: usize,
    nx: usize,
    header: &Header,
    force: bool,
) -> Result<ImageFile, FitsWriteError> {
    begin::<i32>(path, ny, nx, header, force, MAPPED_BYTES, true)
}

/// Begins an image of `T`: the target refused if present without `force`, the header made,
/// the temporary file created and, from `mapped_from` bytes of pixels (Linux), mapped
/// ([`mapping`]), its pages written once if `touch`.
fn begin<T: Pixel>(
    path: &Path,
    ny: usize,
    nx: usize,
    header: &Header,
    force: bool,
    mapped_from: usize,
    touch: bool,
) -> Result<ImageFile, FitsWriteError> {
    let shown = path.display();
    if path.exists() && !force {
        return Err(FitsWriteError(format!(
            "{shown} already exists; not overwriting it (use --force to replace it)"
        )));
    }
    let head = header_bytes(header, T::BITPIX, nx, ny, &shown)?;
    let Some(pixel_bytes) = nx.checked_mul(ny).and_then(|n| n.checked_mul(4)) else {
        return Err(FitsWriteError(format!(
            "cannot write {shown}: an image of {nx} x {ny} pixels is too large"
        )));
    };
    let tmp = temp_path(path);
    let file = crate::output::create_new_file(&tmp)
        .map_err(|e| FitsWriteError(format!("cannot write {shown}: creating the file: {e}")))?;
    #[allow(unused_mut)]
    let mut image = ImageFile {
        path: path.to_path_buf(),
        tmp,
        bitpix: T::BITPIX,
        dims: (ny, nx),
        head,
        file: Some(file),
        #[cfg(target_os = "linux")]
        map: None,
        finished: false,
    };
    #[cfg(target_os = "linux")]
    {
        if pixel_bytes >= mapped_from.max(1) {
            let total = image.head.len() + pixel_bytes.div_ceil(BLOCK) * BLOCK;
            let from = image.head.len();
            let f = image.file.as_ref().expect("the file is open");
            image.map =
                mapping(f, total, from, touch).map_err(|e| image.fail("writing the pixels", &e))?;
        }
    }
    #[cfg(not(target_os = "linux"))]
    let _ = (mapped_from, touch, pixel_bytes);
    Ok(image)
}

impl ImageFile {
    fn fail(&self, what: &str, e: &dyn fmt::Display) -> FitsWriteError {
        FitsWriteError(format!("cannot write {}: {what}: {e}", self.path.display()))
    }

    /// Writes the label map `data` (the size the file was begun with) and gives the file its
    /// name.
    pub fn finish_i32(self, data: ArrayView2<i32>) -> Result<(), FitsWriteError> {
        self.finish(data)
    }

    /// Writes the header, the pixels and the padding (through the mapping if there is one,
    /// else in pieces), then renames the temporary file to the target.
    fn finish<T: Pixel>(mut self, data: ArrayView2<T>) -> Result<(), FitsWriteError> {
        if T::BITPIX != self.bitpix || data.dim() != self.dims {
            return Err(self.fail(
                "the pixels",
                &format!(
                    "{:?} of BITPIX {} given for an image begun as {:?} of BITPIX {}",
                    data.dim(),
                    T::BITPIX,
                    self.dims,
                    self.bitpix
                ),
            ));
        }
        // Straight from the array when it is contiguous, else through a copy.
        let owned: Vec<T>;
        let flat: &[T] = match data.as_slice() {
            Some(s) => s,
            None => {
                owned = data.iter().copied().collect();
                &owned
            }
        };
        #[cfg(target_os = "linux")]
        let mapped = self
            .map
            .take()
            .map(|mut map| fill(&mut map, &self.head, flat))
            .is_some();
        #[cfg(not(target_os = "linux"))]
        let mapped = false;
        if !mapped {
            let f = self.file.take().expect("the file is open");
            write_in_pieces(f, &self.head, flat).map_err(|(what, e)| self.fail(what, &e))?;
        }
        self.file = None;
        // Under the interrupt handler's lock, as the file was created: an interrupt removes
        // either this temporary or the file it becomes.
        crate::output::creating(|| std::fs::rename(&self.tmp, &self.path))
            .map_err(|e| self.fail("renaming the temporary file", &e))?;
        self.finished = true;
        Ok(())
    }
}

impl Drop for ImageFile {
    fn drop(&mut self) {
        #[cfg(target_os = "linux")]
        drop(self.map.take());
        self.file = None;
        if !self.finished {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Pixel bytes from which an image is written through a mapping of the file (Linux): 8 MiB.
pub const MAPPED_BYTES: usize = 1 << 23;

/// Writes the header, the pixels a large piece at a time and the block's padding to `f`, in
/// order; on failure, what was being written and why.
fn write_in_pieces<T: Pixel>(
    mut f: std::fs::File,
    head: &[u8],
    flat: &[T],
) -> Result<(), (&'static str, std::io::Error)> {
    use std::io::Write;
    f.write_all(head).map_err(|e| ("writing the header", e))?;
    let mut buf = vec![0u8; PIECE_PIXELS.min(flat.len()) * 4];
    for piece in flat.chunks(PIECE_PIXELS) {
        let bytes = &mut buf[..piece.len() * 4];
        convert(bytes, piece);
        f.write_all(bytes).map_err(|e| ("writing the pixels", e))?;
    }
    let total = flat.len() * 4;
    f.write_all(&vec![0u8; total.div_ceil(BLOCK) * BLOCK - total])
        .map_err(|e| ("writing the pixels", e))
}

/// The big-endian bytes of `pixels` into `bytes` (four per pixel).
#[inline]
fn convert<T: Pixel>(bytes: &mut [u8], pixels: &[T]) {
    for (b, &v) in bytes.chunks_exact_mut(4).zip(pixels) {
        b.copy_from_slice(&v.be_bytes());
    }
}

/// A shared mapping of the empty file `f` made `total` bytes long, for writing a whole HDU
/// through it: the page cache's pages are then taken by all threads at once (in [`fill`]) or
/// ahead of time (with `touch`, each page from byte `from` on read once now) rather than
/// one at a time by `write` calls, which on the machine of BENCHMARKS.md made a 268 MB label
/// map take 0.05-0.13 s instead of 0.16-0.64 s. The file's blocks are reserved first
/// (`fallocate`), so that a full disk is an error here rather than a signal when a page of
/// the mapping is written. `Ok(None)`, the file left empty, where this does not apply (a file
/// system without `fallocate`, no mapping); the image is then written in pieces.
#[cfg(target_os = "linux")]
fn mapping(
    f: &std::fs::File,
    total: usize,
    from: usize,
    touch: bool,
) -> std::io::Result<Option<memmap2::MmapMut>> {
    use std::os::fd::AsRawFd;
    let Ok(len) = libc::off_t::try_from(total) else {
        return Ok(None);
    };
    // SAFETY: a valid open file descriptor; mode 0 allocates the range and extends the file.
    if unsafe { libc::fallocate(f.as_raw_fd(), 0, 0, len) } != 0 {
        let e = std::io::Error::last_os_error();
        return match e.raw_os_error() {
            Some(libc::EOPNOTSUPP | libc::ENOSYS | libc::EINVAL | libc::EPERM) => Ok(None),
            _ => Err(e),
        };
    }
    // Some file systems accept `fallocate` without reserving the blocks (ZFS checks the free
    // room and leaves the file sparse): there a page written later could still find no room.
    {
        use std::os::unix::fs::MetadataExt;
        if f.metadata()?.blocks().saturating_mul(512) < total as u64 {
            f.set_len(0)?;
            return Ok(None);
        }
    }
    // SAFETY: the file is this run's own temporary file, just created and not yet renamed,
    // so no other program changes its length while it is mapped.
    let map = match unsafe { memmap2::MmapMut::map_mut(f) } {
        Ok(m) if m.len() == total => m,
        _ => {
            f.set_len(0)?;
            return Ok(None);
        }
    };
    if touch {
        // Each page (of 4 KiB or more) of the pixels read once: the page cache's pages are
        // taken now, without being made dirty (written now, a sweep longer than the kernel's
        // writeback delay would have them written to disk twice).
        let mut seen = 0u8;
        for i in (from & !4095..total).step_by(4096).chain([total - 1]) {
            seen ^= map[i];
        }
        std::hint::black_box(seen);
    }
    Ok(Some(map))
}

/// The header, the pixels (converted by all threads) and the padding into `map`, the whole
/// HDU.
#[cfg(target_os = "linux")]
fn fill<T: Pixel>(map: &mut [u8], head: &[u8], flat: &[T]) {
    use rayon::prelude::*;
    let (h, rest) = map.split_at_mut(head.len());
    h.copy_from_slice(head);
    let (pixels, padding) = rest.split_at_mut(flat.len() * 4);
    pixels
        .par_chunks_mut(PIECE_PIXELS * 4)
        .zip(flat.par_chunks(PIECE_PIXELS))
        .for_each(|(b, p)| convert(b, p));
    padding.fill(0);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::header::Value;
    use fitsio::FitsFile;
    use ndarray::Array2;

    /// The image written by CFITSIO itself (through the `fitsio` crate): a new primary image,
    /// the caller's cards appended with `ffprec`, the pixels with `write_image`.
    fn cfitsio_reference<T: fitsio::images::WriteImage + Copy>(
        path: &Path,
        data: ArrayView2<T>,
        kind: fitsio::images::ImageType,
        header: &Header,
    ) {
        let (ny, nx) = data.dim();
        let desc = fitsio::images::ImageDescription {
            data_type: kind,
            dimensions: &[ny, nx],
        };
        let mut f = FitsFile::create(path)
            .with_custom_primary(&desc)
            .open()
            .unwrap();
        let hdu = f.primary_hdu().unwrap();
        let mut status = 0;
        // SAFETY: an open FitsFile and a NUL-terminated keyword.
        unsafe { fitsio::sys::ffdkey(f.as_raw(), c"EXTNAME".as_ptr(), &mut status) };
        for card in header.cards() {
            if is_structural(&card.key) {
                continue;
            }
            for image in crate::header::card_images(card) {
                let c = std::ffi::CString::new(image).unwrap();
                let mut status = 0;
                // SAFETY: an open FitsFile and a NUL-terminated card of 80 characters.
                unsafe { fitsio::sys::ffprec(f.as_raw(), c.as_ptr(), &mut status) };
                assert_eq!(status, 0, "card {}", card.key);
            }
        }
        let flat: Vec<T> = data.iter().copied().collect();
        hdu.write_image(&mut f, &flat).unwrap();
    }

    /// The files equal, byte for byte, those CFITSIO (fitsio 0.21.10 with its bundled
    /// CFITSIO, fitsio-src) writes for the same pixels and cards: float images with NaN, integer
    /// images, a view that is not contiguous, headers of one and of several blocks, images
    /// whose data end inside a block and exactly on one.
    #[test]
    fn images_equal_those_cfitsio_writes() {
        let dir = tempfile::tempdir().unwrap();
        let mut small = Header::new();
        small.set("BUNIT", Value::Str("MJy/sr".into()), "surface brightness");
        small.set("CDELT1", Value::Float(-1.0 / 720.0), "deg");
        small.set("BLANKID", Value::Int(-1), "");
        small.set("FLAG", Value::Bool(true), "a flag");
        let mut big = small.clone();
        for i in 0..70 {
            big.set(&format!("KEY{i}"), Value::Float(i as f64 * 0.1), "filler");
        }
        // 720 pixels of 4 bytes fill exactly one block.
        for (k, (ny, nx)) in [(3usize, 5usize), (24, 30), (37, 41)]
            .into_iter()
            .enumerate()
        {
            // Written in pieces and (on Linux) through a mapping of the file.
            for (j, h, from) in [
                (0, &small, MAPPED_BYTES),
                (1, &big, MAPPED_BYTES),
                (2, &small, 0),
                (3, &big, 0),
            ] {
                let mut f = Array2::<f32>::from_shape_fn((ny, nx), |(y, x)| {
                    (y as f32 - 2.5) * 1e21 + x as f32 * 0.37
                });
                f[[1, 2]] = f32::NAN;
                f[[0, 0]] = -0.0;
                let l = Array2::<i32>::from_shape_fn((ny, nx), |(y, x)| (y * nx + x) as i32 - 7);
                let name = |what: &str| dir.path().join(format!("{what}-{k}-{j}.fits"));
                write_image(&name("f"), f.view(), h, false, from).unwrap();
                cfitsio_reference(&name("rf"), f.view(), fitsio::images::ImageType::Float, h);
                write_image(&name("i"), l.view(), h, false, from).unwrap();
                cfitsio_reference(&name("ri"), l.view(), fitsio::images::ImageType::Long, h);
                // A transposed view is not contiguous.
                let t = f.t();
                write_image(&name("t"), t, h, false, from).unwrap();
                cfitsio_reference(&name("rt"), t, fitsio::images::ImageType::Float, h);
                for (a, b) in [("f", "rf"), ("i", "ri"), ("t", "rt")] {
                    let (x, y) = (
                        std::fs::read(name(a)).unwrap(),
                        std::fs::read(name(b)).unwrap(),
                    );
                    assert!(
                        x == y,
                        "{a} {ny}x{nx} case {j}: differs from CFITSIO's file"
                    );
                }
            }
        }
        // A card FITS does not allow is refused with a sentence naming the file, and no
        // file is left.
        let mut bad = Header::new();
        bad.set("OBJECT", Value::Str("caf\u{e9}".into()), "");
        let path = dir.path().join("bad.fits");
        let err =
            write_image_i32(&path, Array2::<i32>::zeros((2, 2)).view(), &bad, false).unwrap_err();
        assert!(
            err.0.contains("bad.fits") && err.0.contains("OBJECT"),
            "{err}"
        );
        assert!(!path.exists());
    }

    /// On Linux the mapping is used from its size on (not a silent fall-back to the writer in
    /// pieces) and leaves the file at the HDU's length; a file begun ahead, its pages made
    /// ready, gets the same bytes as one written at once (and CFITSIO's, above); an unfinished
    /// one leaves nothing, and pixels of another size are refused.
    #[test]
    fn begun_images_finish_as_written_at_once() {
        let dir = tempfile::tempdir().unwrap();
        let mut h = Header::new();
        h.set("BLANKID", Value::Int(-1), "");
        let l = Array2::<i32>::from_shape_fn((40, 25), |(y, x)| (y * 25 + x) as i32 - 3);
        #[cfg(target_os = "linux")]
        {
            // Whether this folder's file system reserves blocks with fallocate (where it does
            // not, images are written in pieces by design, and the mapping is not tested here).
            let probe = crate::output::create_new_file(&dir.path().join("probe")).unwrap();
            let supported = mapping(&probe, 3 * BLOCK, BLOCK, false).unwrap().is_some();
            drop(probe);
            std::fs::remove_file(dir.path().join("probe")).unwrap();
            if !supported {
                eprintln!(
                    "the temporary folder's file system does not reserve blocks: mapping not tested"
                );
            }
            let path = dir.path().join("m.fits");
            let below = begin::<i32>(&path, 40, 25, &h, false, 4001, false).unwrap();
            assert!(below.map.is_none());
            drop(below);
            let at = begin::<i32>(&path, 40, 25, &h, false, 4000, false).unwrap();
            assert_eq!(
                at.map.as_ref().map(|m| m.len()),
                supported.then_some(3 * BLOCK)
            );
            at.finish(l.view()).unwrap();
            let bytes = std::fs::read(&path).unwrap();
            assert_eq!(bytes.len(), 3 * BLOCK);
            assert_eq!(&bytes[BLOCK + 4 * 999..BLOCK + 4000], &996i32.to_be_bytes());
            assert!(bytes[BLOCK + 4000..].iter().all(|&b| b == 0));
        }
        let once = dir.path().join("once.fits");
        write_image_i32(&once, l.view(), &h, false).unwrap();
        for (k, from) in [MAPPED_BYTES, 0].into_iter().enumerate() {
            let path = dir.path().join(format!("begun-{k}.fits"));
            let begun = begin::<i32>(&path, 40, 25, &h, false, from, true).unwrap();
            begun.finish(l.view()).unwrap();
            assert!(std::fs::read(&path).unwrap() == std::fs::read(&once).unwrap());
        }
        let names = || {
            let mut v: Vec<String> = std::fs::read_dir(dir.path())
                .unwrap()
                .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
                .collect();
            v.sort();
            v
        };
        // Two images begun for one target keep their own temporary files: each finishes with
        // its own pixels, the last one finished stays.
        let twice = dir.path().join("twice.fits");
        let a = begin::<i32>(&twice, 40, 25, &h, false, 0, true).unwrap();
        let b = begin::<i32>(&twice, 40, 25, &h, false, 0, true).unwrap();
        let l9 = l.mapv(|v| v + 9);
        a.finish(l.view()).unwrap();
        assert!(std::fs::read(&twice).unwrap() == std::fs::read(&once).unwrap());
        b.finish(l9.view()).unwrap();
        let once9 = dir.path().join("once9.fits");
        write_image_i32(&once9, l9.view(), &h, false).unwrap();
        assert!(std::fs::read(&twice).unwrap() == std::fs::read(&once9).unwrap());
        let before = names();
        let path = dir.path().join("left.fits");
        drop(begin_image_i32(&path, 40, 25, &h, false).unwrap());
        let wrong = begin::<i32>(&path, 40, 25, &h, false, 0, true).unwrap();
        let err = wrong.finish(l.t()).unwrap_err();
        assert!(err.0.contains("left.fits"), "{err}");
        assert_eq!(names(), before, "no file left by an unfinished image");
    }

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
