//! Loading a FITS image into a map: pixels, missing-pixel mask, sky coordinates, units, beam
//! and wavelength.
//!
//! Owns the choice of HDU (the primary, or the first image HDU that holds data, or the one
//! named by `--hdu`), the checks made before any pixel is read (the file is FITS, its header
//! is complete, the file holds all the data the header claims), gzip-compressed files and
//! tile-compressed image HDUs (FITS Standard 4.0, section 10), the reading of every BITPIX
//! with BSCALE/BZERO applied and BLANK or NaN turned into missing pixels (FITS Standard 4.0,
//! sections 4.4 and 5), squeezing of length-1 axes and the choice of one plane of a cube, and
//! the reading of the beam (BMAJ/BMIN/BPA, or the AIPS `HISTORY` card convention) and of the
//! wavelength (a FREQ or WAVE axis, RESTFRQ/RESTFREQ/FREQ/OBSFREQ, WAVELEN/WAVELNTH with the
//! unit its comment gives, section 4.3.2), a header wavelength outside 1 um to 10 m not used.
//!
//! FITS Standard 4.0 here is the Definition of the Flexible Image Transport System (FITS),
//! version 4.0 (IAU FITS Working Group, 2016; document of 2018 August 13).
//!
//! Pixel values are held as 32-bit floats (about 7 significant digits), with NaN for missing
//! pixels; pixel coordinates are zero-based with (0, 0) the centre of the first pixel, x
//! along NAXIS1 (array column) and y along NAXIS2 (array row).
//!
//! The pixels are read by CFITSIO (Pence 1999, ASP Conf. Ser. 172, 487) through the `fitsio`
//! crate's bindings, opened with `fits_open_diskfile` so that file names are never parsed as
//! CFITSIO's extended file-name syntax.

use std::ffi::{CStr, CString};
use std::io::Read;
use std::path::{Path, PathBuf};

use fitsio::sys;
use ndarray::Array2;

use crate::error::{Error, Result};
use crate::header::Header;
use crate::units::{self, Dimension, ExtinctionBand, PixelUnit, Quantity};
use crate::wcs::Wcs;

/// Which HDU to read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum HduChoice {
    /// The primary HDU if it holds an image, else the first image extension with data.
    Auto,
    /// An HDU by zero-based index (0 is the primary HDU).
    Index(usize),
    /// An HDU by EXTNAME (case-insensitive).
    Name(String),
}

impl HduChoice {
    /// Parses `--hdu N|NAME`.
    pub fn parse(text: &str) -> Self {
        match text.trim().parse::<usize>() {
            Ok(i) => HduChoice::Index(i),
            Err(_) => HduChoice::Name(text.trim().to_string()),
        }
    }
}

/// A beam: a 2-D Gaussian given by its full widths at half maximum.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Beam {
    /// Major-axis FWHM in degrees.
    pub major_deg: f64,
    /// Minor-axis FWHM in degrees.
    pub minor_deg: f64,
    /// Position angle of the major axis in degrees, east of north.
    pub pa_deg: f64,
}

impl Beam {
    /// Solid angle of the Gaussian beam, pi/(4 ln 2) * major * minor, in steradians.
    pub fn solid_angle_sr(&self) -> f64 {
        std::f64::consts::PI / (4.0 * std::f64::consts::LN_2)
            * (self.major_deg * units::DEG)
            * (self.minor_deg * units::DEG)
    }

    /// The beam with FWHM `first` along position angle `pa_deg` and `second` across it (all in
    /// degrees). Given the narrow axis first, the major axis lies 90 degrees from `pa_deg`.
    pub fn from_axes(first: f64, second: f64, pa_deg: f64) -> Beam {
        if second > first {
            Beam {
                major_deg: second,
                minor_deg: first,
                pa_deg: (pa_deg + 90.0).rem_euclid(180.0),
            }
        } else {
            Beam {
                major_deg: first,
                minor_deg: second,
                pa_deg,
            }
        }
    }

    /// Parses `--beam MAJ[,MIN[,PA]]` (for example `18.2arcsec` or `20arcsec,15arcsec,30deg`).
    pub fn parse(text: &str) -> std::result::Result<Beam, String> {
        let parts: Vec<&str> = text.split(',').collect();
        if parts.is_empty() || parts.len() > 3 {
            return Err(format!(
                "--beam '{text}' is not understood: give the FWHM, such as 18.2arcsec, or major,minor,angle such as 20arcsec,15arcsec,30deg."
            ));
        }
        let angle = |s: &str| units::parse_quantity(s, &[Dimension::Angle], "--beam");
        let major = angle(parts[0])?.si / units::DEG;
        let minor = if parts.len() > 1 {
            angle(parts[1])?.si / units::DEG
        } else {
            major
        };
        let pa = if parts.len() > 2 {
            angle(parts[2])?.si / units::DEG
        } else {
            0.0
        };
        // A width that is not positive is named as it was typed.
        for (width, typed, axis) in [
            (major, parts[0], "major axis"),
            (
                minor,
                parts.get(1).copied().unwrap_or(parts[0]),
                "minor axis",
            ),
        ] {
            if !(width > 0.0 && width.is_finite()) {
                return Err(format!(
                    "--beam '{text}': the {axis}'s FWHM {} is not a positive width; give the FWHM, such as 18.2arcsec.",
                    typed.trim()
                ));
            }
        }
        let beam = Beam::from_axes(major, minor, pa);
        beam.check()
            .map_err(|e| format!("--beam '{text}': {e}; give the FWHM, such as 18.2arcsec."))?;
        Ok(beam)
    }

    fn check(&self) -> std::result::Result<(), String> {
        let positive = self.major_deg > 0.0 && self.minor_deg > 0.0;
        if !positive || !self.major_deg.is_finite() || !self.pa_deg.is_finite() {
            return Err(format!(
                "the beam must have positive, finite widths (major {} deg, minor {} deg)",
                self.major_deg, self.minor_deg
            ));
        }
        Ok(())
    }
}

/// How to load a map.
#[derive(Debug, Clone)]
pub struct LoadOptions {
    /// Which HDU.
    pub hdu: HduChoice,
    /// For a cube: the zero-based plane to take along its one long extra axis.
    pub plane: Option<usize>,
    /// A unit to use instead of BUNIT (same spellings).
    pub unit: Option<String>,
    /// The band of an extinction map in magnitudes.
    pub band: ExtinctionBand,
    /// Whether the band was asked for (`--extinction-band`) rather than assumed: a unit that
    /// names the other band (`mag(AV)`) is then refused as a contradiction.
    pub band_given: bool,
    /// A beam to use instead of the header's.
    pub beam: Option<Beam>,
    /// A wavelength or frequency to use instead of the header's.
    pub wavelength: Option<Quantity>,
    /// Whether a BUNIT that is not text (a broken header) is an error (`true` for every
    /// command that measures); a missing BUNIT, or one cairn does not convert, reads as
    /// [`PixelUnit::Other`] with a warning either way.
    pub require_unit: bool,
    /// A pixel value that marks a missing pixel (`--missing-value`, such as 0 for a
    /// zero-filled border), beside NaN and BLANK.
    pub missing_value: Option<f32>,
}

impl Default for LoadOptions {
    fn default() -> Self {
        LoadOptions {
            hdu: HduChoice::Auto,
            plane: None,
            unit: None,
            band: ExtinctionBand::V,
            band_given: false,
            beam: None,
            wavelength: None,
            require_unit: true,
            missing_value: None,
        }
    }
}

/// Where a value came from: the header or the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Source {
    /// Read from the FITS header.
    Header,
    /// Given on the command line.
    Option,
}

/// A loaded map.
#[derive(Debug, Clone)]
pub struct Map {
    /// The file it came from.
    pub path: PathBuf,
    /// Zero-based index of the HDU read.
    pub hdu_index: usize,
    /// EXTNAME of that HDU, if any.
    pub hdu_name: Option<String>,
    /// BITPIX of the stored data.
    pub bitpix: i64,
    /// The axis lengths as stored (NAXIS1, NAXIS2, ...).
    pub stored_axes: Vec<usize>,
    /// The plane taken from a cube, if any.
    pub plane: Option<usize>,
    /// The pixels, rows along y, NaN where missing.
    pub data: Array2<f32>,
    /// The HDU's header.
    pub header: Header,
    /// What the pixels measure (`None` only for a BUNIT that is not text, when loaded with
    /// `require_unit = false`).
    pub unit: Option<PixelUnit>,
    /// The unit text as read or given.
    pub unit_text: String,
    /// Where the unit came from.
    pub unit_source: Source,
    /// Sky coordinates, if the header has a celestial WCS.
    pub wcs: Option<Wcs>,
    /// The beam, if known.
    pub beam: Option<Beam>,
    /// Where the beam came from.
    pub beam_source: Option<Source>,
    /// Wavelength in metres, if known.
    pub wavelength_m: Option<f64>,
    /// Where the wavelength came from.
    pub wavelength_source: Option<Source>,
    /// Things the user should know (shown on stderr and in `inspect`).
    pub warnings: Vec<String>,
    /// Set when this map is a file's map smoothed to a common linear resolution
    /// ([`crate::resolution::to_common_resolution`]): what was asked, so that it can be redone.
    pub common_resolution: Option<CommonResolution>,
    /// The value read as missing besides NaN and BLANK ([`LoadOptions::missing_value`]).
    pub missing_value: Option<f32>,
}

/// How a map was smoothed to a common linear resolution, recorded so that the same map can be
/// made again from its file (by `cairn draw`).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct CommonResolution {
    /// The linear resolution asked for, metres (as given to the smoothing, so that it is
    /// redone to the bit).
    pub resolution_m: f64,
    /// The distance it was turned into an angle with, metres.
    pub distance_m: f64,
    /// The file's beam before smoothing.
    pub input_beam: Beam,
    /// The side of the blocks of the file's pixels averaged into one pixel of the smoothed
    /// map (1: not regridded); pixel positions and areas refer to the smoothed map's grid.
    pub block: usize,
}

impl Map {
    /// Number of columns (NAXIS1).
    pub fn nx(&self) -> usize {
        self.data.ncols()
    }

    /// Number of rows (NAXIS2).
    pub fn ny(&self) -> usize {
        self.data.nrows()
    }

    /// Number of missing pixels.
    pub fn missing_count(&self) -> usize {
        self.data.iter().filter(|v| v.is_nan()).count()
    }
}

/// An open CFITSIO file, closed on drop.
struct FitsHandle {
    ptr: *mut sys::fitsfile,
}

impl Drop for FitsHandle {
    fn drop(&mut self) {
        let mut status = 0;
        // SAFETY: ptr came from a successful ffdkopn and is closed once.
        unsafe {
            sys::ffclos(self.ptr, &mut status);
        }
    }
}

/// CFITSIO's text for a status code.
fn cfitsio_text(status: i32) -> String {
    let mut buf = [0 as std::os::raw::c_char; 32];
    // SAFETY: ffgerr writes at most 31 characters plus NUL.
    unsafe { sys::ffgerr(status, buf.as_mut_ptr()) };
    // SAFETY: NUL-terminated by ffgerr.
    unsafe { CStr::from_ptr(buf.as_ptr()) }
        .to_string_lossy()
        .trim()
        .to_string()
}

/// Refuses scaling keywords that CFITSIO would pass over when malformed (FITS Standard 4.0,
/// section 4.4.2.5): BSCALE and BZERO must be finite numbers, BSCALE not zero, and BLANK, for
/// integer data, an integer; otherwise the pixel values would be read unscaled, or missing
/// pixels as values, without a word.
fn check_scaling(path: &Path, header: &Header, bitpix: i64) -> Result<()> {
    use crate::header::Value;
    for key in ["BSCALE", "BZERO"] {
        let Some(v) = header.get(key) else { continue };
        let x = match v {
            Value::Int(i) => Some(*i as f64),
            Value::Float(x) if x.is_finite() => Some(*x),
            _ => None,
        };
        if x.is_none() || (key == "BSCALE" && x == Some(0.0)) {
            return Err(Error::input(
                path,
                format!(
                    "has {key} = {v}, which is not a usable scale, so its pixel values cannot be read; correct {key} in a copy of the file."
                ),
            ));
        }
    }
    if bitpix > 0
        && let Some(v) = header.get("BLANK")
        && !matches!(v, Value::Int(_))
    {
        return Err(Error::input(
            path,
            format!(
                "has BLANK = {v}, which is not an integer, so its missing pixels cannot be told from the others; correct BLANK in a copy of the file."
            ),
        ));
    }
    Ok(())
}

/// Bytes per pixel of a BITPIX.
fn bytes_per_pixel(bitpix: i64) -> Option<u64> {
    match bitpix {
        8 => Some(1),
        16 => Some(2),
        32 | -32 => Some(4),
        64 | -64 => Some(8),
        _ => None,
    }
}

/// Checks the file's first bytes: a FITS file starts with `SIMPLE  =`, a gzip-compressed one
/// (`.fits.gz`, which CFITSIO opens by decompressing it in memory) with the gzip magic
/// bytes. Returns the file's length and whether it is gzip-compressed.
fn check_signature(path: &Path) -> Result<(u64, bool)> {
    let meta = std::fs::metadata(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => Error::input(path, "no such file; check the path."),
        _ => Error::input(
            path,
            format!("cannot be read ({e}); check its permissions."),
        ),
    })?;
    if meta.is_dir() {
        return Err(Error::input(
            path,
            "is a folder, not a FITS file; give the map's file name.",
        ));
    }
    if !meta.is_file() {
        // A pipe or a device: reading it could wait for ever, and a map is read twice (its
        // signature, then by CFITSIO).
        return Err(Error::input(
            path,
            "is not a regular file (a pipe or a device); save the map to a file and give its name.",
        ));
    }
    let mut first = [0u8; 80];
    let mut f = std::fs::File::open(path).map_err(|e| {
        Error::input(
            path,
            format!("cannot be opened ({e}); check its permissions."),
        )
    })?;
    let n = read_up_to(&mut f, &mut first)
        .map_err(|e| Error::input(path, format!("cannot be read ({e}).")))?;
    if n >= 2 && first.starts_with(&[0x1f, 0x8b]) {
        // What it expands to must begin as a FITS file does.
        let mut head = [0u8; 80];
        let mut gz = flate2::read::MultiGzDecoder::new(std::io::BufReader::new(
            std::fs::File::open(path)
                .map_err(|e| Error::input(path, format!("cannot be read ({e}).")))?,
        ));
        let mut got = 0;
        while got < head.len() {
            match gz.read(&mut head[got..]) {
                Ok(0) | Err(_) => break,
                Ok(k) => got += k,
            }
        }
        if got == 0 {
            return Err(Error::input(
                path,
                "is gzip-compressed but damaged or cut short (nothing can be decompressed from it); re-export or re-download it.",
            ));
        }
        if !head[..got].starts_with(b"SIMPLE  =") {
            return Err(Error::input(
                path,
                "is gzip-compressed but not a compressed FITS file (what it expands to does not begin with the card SIMPLE = T); give a FITS image.",
            ));
        }
        return Ok((meta.len(), true));
    }
    if n < 80 || !first.starts_with(b"SIMPLE  =") {
        return Err(Error::input(
            path,
            "is not a FITS file (it does not begin with the card SIMPLE = T, nor is it gzip-compressed FITS); give a FITS image.",
        ));
    }
    Ok((meta.len(), false))
}

/// Whether the gzip-compressed file `path` is cut short or damaged: its whole stream is
/// decompressed (to nowhere) and any failure counts. Called only once reading it has failed.
fn gzip_damaged(path: &Path) -> bool {
    let Ok(f) = std::fs::File::open(path) else {
        return false;
    };
    let mut gz = flate2::read::MultiGzDecoder::new(std::io::BufReader::new(f));
    std::io::copy(&mut gz, &mut std::io::sink()).is_err()
}

/// The refusal of a gzip-compressed `path` whose stream is cut short or damaged.
fn gzip_truncated(path: &Path) -> Error {
    Error::input(
        path,
        "is truncated or damaged: its gzip-compressed stream ends before the map does; re-export or re-download it.",
    )
}

fn read_up_to(f: &mut std::fs::File, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut n = 0;
    while n < buf.len() {
        let k = f.read(&mut buf[n..])?;
        if k == 0 {
            break;
        }
        n += k;
    }
    Ok(n)
}

/// Loads a map as described by `opts`.
pub fn load(path: &Path, opts: &LoadOptions) -> Result<Map> {
    let (file_len, gzipped) = check_signature(path)?;
    let cpath = CString::new(path.as_os_str().as_encoded_bytes())
        .map_err(|_| Error::input(path, "has a NUL byte in its name; rename it."))?;
    let mut status = 0;
    let mut ptr = std::ptr::null_mut();
    // SAFETY: cpath is a valid C string; ptr receives a new handle on success.
    unsafe { sys::ffdkopn(&mut ptr, cpath.as_ptr(), 0, &mut status) };
    if status != 0 || ptr.is_null() {
        if gzipped && gzip_damaged(path) {
            return Err(gzip_truncated(path));
        }
        // CFITSIO decompresses a gzip-compressed file in memory as it opens it, so a stream
        // that expands beyond the memory the process may take fails here as a damaged one
        // does, with the same status.
        return Err(Error::input(
            path,
            if gzipped {
                format!(
                    "is gzip-compressed and could not be opened (CFITSIO: {}): it is damaged, or it expands to more than the memory this process may take, as it is decompressed in memory; decompress it (gunzip) and give the .fits file, or re-download it.",
                    cfitsio_text(status)
                )
            } else {
                format!(
                    "is truncated or its header is damaged (CFITSIO: {}); re-export or re-download the file.",
                    cfitsio_text(status)
                )
            },
        ));
    }
    let fits = FitsHandle { ptr };
    let nhdu = count_hdus(&fits, path)?;
    let (index, hdu_note) = choose_hdu(&fits, path, &opts.hdu, nhdu)?;
    move_to(&fits, path, index)?;
    let compressed = is_compressed_image(&fits);
    let mut header = read_header(&fits, path)?;
    let mut inherit_note = None;
    if index > 0 && header.get_bool("INHERIT") == Some(true) {
        inherit_primary(&fits, path, index, &mut header)?;
    } else if index > 0 {
        inherit_note = primary_keys_note(&fits, path, index, &header)?;
    }
    let (bitpix, axes) = image_shape(&fits, path, index)?;
    let (nx, ny, firstpix, plane) = plan_read(path, &header, &axes, opts.plane)?;

    // The header's promise, checked against the file before any pixel buffer exists (not for
    // a gzip-compressed file, whose length is not the data's; CFITSIO has already
    // decompressed it, and a damaged stream fails there).
    let bpp = bytes_per_pixel(bitpix).ok_or_else(|| {
        Error::input(
            path,
            format!("has BITPIX = {bitpix}, which FITS does not define; the file is damaged."),
        )
    })?;
    check_scaling(path, &header, bitpix)?;
    let total: u64 = axes.iter().map(|&a| a as u64).product::<u64>();
    let (mut head0, mut data0, mut end0) = (0i64, 0i64, 0i64);
    // SAFETY: valid handle, out-pointers to locals.
    unsafe { sys::ffghadll(fits.ptr, &mut head0, &mut data0, &mut end0, &mut status) };
    let (needed, promised) = if compressed {
        // A tile-compressed image is stored as a binary table: its data (rows and heap) end
        // where the HDU ends, less at most the padding of the last 2880-byte block.
        let stored = (end0 - data0).max(0) as u64;
        (
            (end0 as u64).saturating_sub(2879),
            stored.saturating_sub(2879),
        )
    } else {
        (
            (data0 as u64).saturating_add(total.saturating_mul(bpp)),
            total.saturating_mul(bpp),
        )
    };
    if status != 0 || (!gzipped && needed > file_len) {
        return Err(Error::input(
            path,
            format!(
                "is truncated: its header promises {}{} bytes of data for HDU {index} but the file ends {} short; re-export or re-download it.",
                if compressed { "at least " } else { "" },
                promised,
                match needed.saturating_sub(file_len) {
                    1 => "1 byte".to_string(),
                    n => format!("{n} bytes"),
                }
            ),
        ));
    }

    let npix = nx
        .checked_mul(ny)
        .ok_or_else(|| Error::input(path, "is too large to address."))?;
    let mut buf: Vec<f32> = Vec::new();
    buf.try_reserve_exact(npix).map_err(|_| {
        Error::input(
            path,
            format!(
                "needs {} MB of memory for its pixels, more than this machine can give.",
                npix * 4 / 1_000_000
            ),
        )
    })?;
    buf.resize(npix, 0.0);
    status = read_pixels(&fits, &firstpix, &mut buf);
    if status != 0 {
        if gzipped && gzip_damaged(path) {
            return Err(gzip_truncated(path));
        }
        // CFITSIO's END_OF_FILE: the data end before the header's promise.
        if status == 107 {
            return Err(Error::input(
                path,
                format!(
                    "is truncated: its data end before the {promised} bytes its header promises for HDU {index}; re-export or re-download it."
                ),
            ));
        }
        return Err(Error::input(
            path,
            format!(
                "could not be read (CFITSIO: {}); the file may be damaged.",
                cfitsio_text(status)
            ),
        ));
    }
    // 64-bit pixels are held as 32-bit floats: a sample read again in double precision says
    // whether that lost what the map measures.
    let narrowing = if bitpix == 64 || bitpix == -64 {
        narrowing_loss(&fits, &firstpix, npix)
    } else {
        None
    };
    drop(fits);
    // Values beyond the range of 32-bit floats (in 64-bit data: such as -1e300 written as a
    // blank) arrive infinite; they are missing pixels, as infinities stored in the file are
    // (CFITSIO reads those as null), and a warning counts them.
    // Pixels of the value `--missing-value` names are missing too. Exact zeros are counted:
    // many of them (a zero-filled border or unobserved area) are said.
    let (mut beyond, mut marked, mut zeros, mut finite) = (0usize, 0usize, 0usize, 0usize);
    for v in buf.iter_mut() {
        if v.is_infinite() {
            beyond += 1;
            *v = f32::NAN;
        } else if opts.missing_value.is_some_and(|m| *v == m) {
            marked += 1;
            *v = f32::NAN;
        } else if v.is_finite() {
            finite += 1;
            zeros += (*v == 0.0) as usize;
        }
    }
    let data = Array2::from_shape_vec((ny, nx), buf).map_err(|e| Error::internal(e.to_string()))?;

    let mut warnings: Vec<String> = hdu_note
        .into_iter()
        .chain(inherit_note)
        .chain(narrowing)
        .collect();
    if beyond > 0 {
        warnings.push(format!(
            "{beyond} pixels hold values beyond the range of 32-bit floats (about 3.4e38 in size, such as -1e300 written as a blank); they are treated as missing"
        ));
    }
    if let Some(m) = opts.missing_value
        && marked == 0
    {
        warnings.push(format!(
            "no pixel of the map has the value --missing-value {m} names, so it changes nothing"
        ));
    }
    if zeros > 0 && zeros * 20 > finite && zeros < finite {
        warnings.push(format!(
            "{zeros} of the map's {finite} measured pixels ({:.1}%) are exactly 0, as a zero-filled border or unobserved area often is: cairn takes them as data, which lowers the noise estimate, the background and so the thresholds, and can split structures at their edge; if they are not data, give --missing-value 0 (or set them to NaN in the file)",
            100.0 * zeros as f64 / finite as f64
        ));
    }
    let hdu_name = header.get_str("EXTNAME").map(str::to_string);

    // Units.
    let (unit, unit_text, unit_source) = match &opts.unit {
        Some(u) => {
            let (unit, text) = units::parse_unit_option(u, opts.band).ok_or_else(|| {
                Error::usage(format!(
                    "--unit '{}' is not understood: give one of {}, or other:UNIT (such as other:K km/s) for a unit cairn does not convert, to measure the map's structure without masses, or none for values without a unit.",
                    u.trim(),
                    units::CONVERTED_UNITS
                ))
            })?;
            // A header unit of another kind that the option replaces: said, as the option
            // then changes what every value means, not only its spelling.
            // (`other:UNIT` and `none` are asked for as the way out of the header's unit.)
            let bunit = header.get_str("BUNIT").unwrap_or("").trim();
            if unit != PixelUnit::Other
                && let Some(theirs) = units::parse_pixel_unit(bunit, opts.band)
                && (std::mem::discriminant(&theirs) != std::mem::discriminant(&unit)
                    || matches!(
                        (theirs, unit),
                        (PixelUnit::Extinction { band: a }, PixelUnit::Extinction { band: b }) if a != b
                    ))
            {
                warnings.push(format!(
                    "--unit '{}' replaces the header's BUNIT '{bunit}' ({}): the values are read as {}",
                    u.trim(),
                    theirs.kind_name(),
                    unit.kind_name()
                ));
            } else if let Some(theirs) = units::parse_pixel_unit(bunit, opts.band)
                && std::mem::discriminant(&theirs) == std::mem::discriminant(&unit)
                && let (Some(a), Some(b)) = (theirs.to_si(), unit.to_si())
                && (b / a - 1.0).abs() > 1e-9
            {
                // The same kind at another scale (mJy/beam for Jy/beam): every level, sum and
                // mass changes by the ratio, which a typing slip would make silently.
                let r = b / a;
                let (factor, way) = if r > 1.0 {
                    (r, "larger")
                } else {
                    (1.0 / r, "smaller")
                };
                warnings.push(format!(
                    "--unit '{}' replaces the header's BUNIT '{bunit}': every value is read as {} times {way} than the header says (and so is every sum and mass); leave out --unit to use the header's unit",
                    u.trim(),
                    units::as_given(factor)
                ));
            }
            (Some(unit), text, Source::Option)
        }
        None => {
            let text = header.get_str("BUNIT").unwrap_or("").trim().to_string();
            let unit = units::parse_pixel_unit(&text, opts.band);
            if unit.is_some() {
                warnings.extend(units::prefix_case_note(&text));
            }
            match (unit, header.get("BUNIT")) {
                (Some(u), _) => (Some(u), text, Source::Header),
                // A BUNIT that is not text is a broken header, not a unit.
                (None, Some(v)) if !matches!(v, crate::header::Value::Str(_)) => {
                    if opts.require_unit {
                        return Err(Error::input(
                            path,
                            format!(
                                "has BUNIT = {v}, which is not a unit's name (BUNIT is text, such as 'MJy/sr'); give --unit with one of {}, or other:UNIT or none to measure the map's structure without masses.",
                                units::CONVERTED_UNITS
                            ),
                        ));
                    }
                    (None, String::new(), Source::Header)
                }
                // A column density or brightness cairn cannot read (a scale factor, as in
                // '1e21 cm-2', or an unfamiliar spelling): refused rather than measured
                // without masses, which would hide the masses the map holds.
                (None, Some(_)) if looks_convertible(&text) => {
                    let per = [format!("{text}/pixel"), format!("{text}/beam")];
                    let why = if per
                        .iter()
                        .all(|u| units::parse_pixel_unit(u, opts.band).is_some())
                    {
                        // A flux density without the area it is per (a pixel or a beam).
                        format!(
                            "BUNIT '{text}', a flux density without the area it is per; give --unit {} if each pixel holds the flux density falling on it, or --unit {} if the map is per beam",
                            per[0], per[1]
                        )
                    } else {
                        format!(
                            "BUNIT '{text}', which looks like a column density, extinction or brightness that cairn cannot read (a scale factor or an unfamiliar spelling); give --unit with one of {} (dividing out a scale factor first), or --unit other:UNIT to measure only the map's structure",
                            units::CONVERTED_UNITS
                        )
                    };
                    if opts.require_unit {
                        return Err(Error::input(path, format!("has {why}.")));
                    }
                    // A command that only describes the map (inspect) says what a measuring
                    // one would refuse.
                    warnings.push(format!("the map has {why}; segment refuses it as it is"));
                    (Some(PixelUnit::Other), text, Source::Header)
                }
                // Any other unit, or none: the structure is measured in the map's own unit.
                (None, bunit) => {
                    let read = if text.is_empty() {
                        format!(
                            "the map has {}, so its values are taken without a unit",
                            if bunit.is_some() {
                                "an empty BUNIT"
                            } else {
                                "no BUNIT"
                            }
                        )
                    } else {
                        format!("BUNIT '{text}' is a unit cairn does not convert to column density")
                    };
                    warnings.push(format!(
                        "{read}: only the structure is measured (hierarchy, positions, sizes, and sums and means in the map's unit), as masses and the physics need a map of dust emission, column density or extinction; if the header's unit is wrong, give --unit with one of {}, or --unit other:UNIT to say the unit is meant.",
                        units::CONVERTED_UNITS
                    ));
                    (Some(PixelUnit::Other), text, Source::Header)
                }
            }
        }
    };

    // An extinction band asked for that the unit itself contradicts (`mag(AV)` with
    // --extinction-band K): the masses differ by A_V/A_K, so neither is taken silently.
    if opts.band_given
        && let Some(PixelUnit::Extinction { band }) = unit
        && band != opts.band
    {
        let name = |b: ExtinctionBand| match b {
            ExtinctionBand::V => "A_V",
            ExtinctionBand::K => "A_K",
        };
        let letter = match opts.band {
            ExtinctionBand::V => "V",
            ExtinctionBand::K => "K",
        };
        return Err(match unit_source {
            Source::Header => Error::input(
                path,
                format!(
                    "has BUNIT '{unit_text}', which names {}, but --extinction-band {letter} was given; if the map is of {}, give --unit mag with --extinction-band {letter} to read it so against the header, or else leave out --extinction-band.",
                    name(band),
                    name(opts.band)
                ),
            ),
            _ => Error::usage(format!(
                "--unit '{unit_text}' names {}, but --extinction-band {letter} was given: give the band once, as --unit mag with --extinction-band, or in the unit alone.",
                name(band)
            )),
        });
    }

    // A band given for a map that is no extinction map changes nothing: said, as the user
    // may have meant the map to be one (an unread BUNIT is warned about already).
    if opts.band_given
        && unit.is_some_and(|u| !matches!(u, PixelUnit::Extinction { .. } | PixelUnit::Other))
    {
        warnings.push(format!(
            "--extinction-band applies to extinction maps, and this map's unit '{unit_text}' is not one, so it changes nothing; if the map is an extinction map, give --unit mag"
        ));
    }

    // Sky coordinates.
    // A WCS keyword given twice: WCSLIB (and so astropy.wcs and most viewers) reads the last
    // card, so cairn does too, and says so when the values differ. A CROTAi beside PCi_j
    // cards is not read (the PC matrix wins, as in WCSLIB): said too.
    for (key, values) in header.repeated() {
        if crate::wcs::is_wcs_key(&key) && values.windows(2).any(|w| w[0] != w[1]) {
            let shown: Vec<String> = values.iter().map(|v| v.to_string()).collect();
            let times = match values.len() {
                2 => "twice".to_string(),
                n => format!("{n} times"),
            };
            warnings.push(format!(
                "the header gives {key} {times} ({}); cairn reads the last, as WCSLIB (astropy.wcs) does",
                shown.join(", ")
            ));
        }
    }
    if crate::wcs::any_pc_card(&header) && (header.contains("CROTA1") || header.contains("CROTA2"))
    {
        warnings.push(
            "the header has both PCi_j cards and CROTAi: the PC matrix is read and CROTAi ignored, as WCSLIB (astropy.wcs) does; remove one of them if that is not what the map means".to_string(),
        );
    }
    let wcs = Wcs::from_header(&header).map_err(|e| {
        let e = e.to_string();
        let e = e.trim_end_matches('.');
        Error::input(
            path,
            if e.contains("resample") {
                format!("{e}.")
            } else {
                format!(
                    "{e}; correct the header's WCS keywords, or resample the map onto a standard projection such as TAN."
                )
            },
        )
    })?;
    // An equatorial frame FITS does not define (Paper II sec. 3.1 lists ICRS, FK5, FK4,
    // FK4-NO-E and GAPPT), such as the common slip RADESYS = 'J2000': kept as read, said.
    if let Some(crate::wcs::SkyFrame::Other(f)) = wcs.as_ref().map(|w| w.frame())
        && let Some(sys) = f.strip_prefix("RA/")
        && !matches!(sys, "FK4-NO-E" | "GAPPT")
    {
        warnings.push(format!(
            "RADESYS = '{sys}' is not a reference system FITS defines (ICRS, FK5, FK4, FK4-NO-E or GAPPT): positions are given as read, in the map's own frame, and not converted to any other; correct RADESYS if the map is in one of those"
        ));
    }
    let ctypes = [1, 2].map(|i| {
        header
            .get_str(&format!("CTYPE{i}"))
            .unwrap_or("")
            .trim()
            .to_string()
    });
    match &wcs {
        None => warnings.push(match crate::wcs::why_not_celestial(&header) {
            Some(why) => format!("{why}; positions and sizes are in pixels until then"),
            None => "the map has no celestial WCS: positions and sizes are in pixels, and anything that needs sky units will say so".to_string(),
        }),
        Some(w) if w.is_linear() => warnings.push(format!(
            "CTYPE1 = '{}' and CTYPE2 = '{}' carry no projection code: cairn reads them as WCSLIB (astropy.wcs) does, as longitude and latitude linear in the pixels; if the map was made with a projection, set its code (such as 'RA---TAN' and 'DEC--TAN')",
            ctypes[0], ctypes[1]
        )),
        Some(_) if ctypes.iter().any(|c| c.chars().any(|ch| ch.is_ascii_lowercase())) => {
            warnings.push(format!(
                "CTYPE1 = '{}' and CTYPE2 = '{}' are in lower case, which WCSLIB (astropy.wcs) does not read: cairn reads them as '{}' and '{}' and writes its outputs so",
                ctypes[0],
                ctypes[1],
                ctypes[0].to_ascii_uppercase(),
                ctypes[1].to_ascii_uppercase()
            ))
        }
        Some(_) => {}
    }

    // A header without the pixel's size: FITS takes 1 degree (WCSLIB and astropy.wcs too),
    // which is almost never what a map means.
    let has_cd = (1..=2).any(|i| (1..=2).any(|j| header.contains(&format!("CD{i}_{j}"))));
    let has_pc = crate::wcs::any_pc_card(&header);
    let no_cdelt: Vec<&str> = ["CDELT1", "CDELT2"]
        .into_iter()
        .filter(|k| !header.contains(k))
        .collect();
    if wcs.is_some() && (has_pc || !has_cd) && !no_cdelt.is_empty() {
        warnings.push(format!(
            "the header gives no {} (nor a CD matrix), so each pixel is taken to be 1 degree along that axis, the FITS default, as WCSLIB (astropy.wcs) reads it; real maps' pixels are almost never that large: add the pixel size in degrees as {}, or the map's sizes, areas and masses are wrong",
            no_cdelt.join(" or "),
            no_cdelt.join(" and ")
        ));
    }

    // Beam. BMAJ = 0, which some pipelines write for a beam they do not know, is no beam.
    let zero_beam = opts.beam.is_none()
        && header.get_f64("BMAJ") == Some(0.0)
        && header.get_f64("BMIN").is_none_or(|b| b == 0.0);
    if zero_beam {
        warnings.push(
            "the header's BMAJ is 0, which says the beam is not known: the map is read without a beam; give it with --beam, such as --beam 18.2arcsec".to_string(),
        );
    }
    let (beam, beam_source) = match opts.beam {
        Some(b) => (Some(b), Some(Source::Option)),
        None if zero_beam => (None, None),
        None => match beam_from_header(&header) {
            Ok(Some(b)) => (Some(b), Some(Source::Header)),
            Ok(None) => (None, None),
            Err(e) => {
                return Err(Error::input(
                    path,
                    format!("{e}; give the beam with --beam, such as --beam 18.2arcsec."),
                ));
            }
        },
    };

    // A beam given that replaces another in the header: said, as --unit's replacement is.
    if let (Some(b), Ok(Some(h))) = (opts.beam, beam_from_header(&header))
        && ((b.major_deg / h.major_deg - 1.0).abs() > 1e-3
            || (b.minor_deg / h.minor_deg - 1.0).abs() > 1e-3)
    {
        warnings.push(format!(
            "--beam ({}\" x {}\") replaces the header's beam ({}\" x {}\"): every area in beams, deconvolved size and beam-based default changes with it; leave out --beam to use the header's",
            units::tidy(b.major_deg * 3600.0),
            units::tidy(b.minor_deg * 3600.0),
            units::tidy(h.major_deg * 3600.0),
            units::tidy(h.minor_deg * 3600.0)
        ));
    }

    // Wavelength: for a plane of a cube along a FREQ or WAVE axis, that plane's own value.
    let plane_axis = plane.and_then(|_| (2..axes.len()).find(|&k| axes[k] > 1));
    let (wavelength_m, wavelength_source) = match opts.wavelength {
        Some(q) => {
            let given = wavelength_from_quantity(q);
            // One that replaces another in the header: said.
            let at_plane = match (plane, plane_axis) {
                (Some(p), Some(k)) => plane_wavelength(&header, k + 1, p, &mut Vec::new()),
                _ => None,
            };
            let header_m =
                at_plane.unwrap_or_else(|| wavelength_from_header(&header, &mut Vec::new()));
            if let Some(h) = header_m
                && (given / h - 1.0).abs() > 1e-3
            {
                warnings.push(format!(
                    "--wavelength ({}) replaces the header's ({}): the dust emission's conversion to column density and mass changes with it; leave out --wavelength to use the header's",
                    describe_length(given),
                    describe_length(h)
                ));
            }
            (Some(given), Some(Source::Option))
        }
        None => {
            let at_plane = match (plane, plane_axis) {
                (Some(p), Some(k)) => plane_wavelength(&header, k + 1, p, &mut warnings),
                _ => None,
            };
            match at_plane.unwrap_or_else(|| wavelength_from_header(&header, &mut warnings)) {
                Some(w) => (Some(w), Some(Source::Header)),
                None => (None, None),
            }
        }
    };

    // A beam narrower than a pixel: the map cannot sample it, so the beam or the pixel size
    // in the header is most likely wrong.
    if let (Some(b), Some(w)) = (beam, &wcs) {
        let (cx, cy) = ((nx as f64 - 1.0) / 2.0, (ny as f64 - 1.0) / 2.0);
        let sr = w.pixel_solid_angle(cx, cy);
        let side = sr.sqrt().to_degrees();
        if side.is_finite() && side > 0.0 && b.solid_angle_sr() < sr {
            warnings.push(format!(
                "the beam, {}\" x {}\"{}, covers less than a pixel ({}\" square or its equal in area), which no map can sample: check BMAJ and BMIN and the pixel size (CDELT or CD), all in degrees, or give --beam",
                units::tidy(b.major_deg * 3600.0),
                units::tidy(b.minor_deg * 3600.0),
                if beam_source == Some(Source::Option) {
                    " (from --beam)"
                } else {
                    ""
                },
                units::tidy(side * 3600.0)
            ));
        }
    }

    Ok(Map {
        path: path.to_path_buf(),
        hdu_index: index,
        hdu_name,
        bitpix,
        stored_axes: axes,
        plane,
        data,
        header,
        unit,
        unit_text,
        unit_source,
        wcs,
        beam,
        beam_source,
        wavelength_m,
        wavelength_source,
        warnings,
        common_resolution: None,
        missing_value: opts.missing_value,
    })
}

/// A wavelength (length) or frequency quantity as a wavelength in metres.
pub fn wavelength_from_quantity(q: Quantity) -> f64 {
    match q.dim {
        Dimension::Frequency => units::C_LIGHT / q.si,
        _ => q.si,
    }
}

fn count_hdus(fits: &FitsHandle, path: &Path) -> Result<usize> {
    let mut n = 0;
    let mut status = 0;
    // SAFETY: valid handle.
    unsafe { sys::ffthdu(fits.ptr, &mut n, &mut status) };
    if status != 0 {
        return Err(Error::input(
            path,
            format!(
                "is truncated or damaged after its first header (CFITSIO: {}); re-export the file.",
                cfitsio_text(status)
            ),
        ));
    }
    Ok(n.max(1) as usize)
}

fn move_to(fits: &FitsHandle, path: &Path, index: usize) -> Result<i32> {
    let mut status = 0;
    let mut hdutype = 0;
    // SAFETY: valid handle; HDU numbers are 1-based in CFITSIO.
    unsafe { sys::ffmahd(fits.ptr, index as i32 + 1, &mut hdutype, &mut status) };
    if status != 0 {
        return Err(Error::input(
            path,
            format!(
                "HDU {index} cannot be read (CFITSIO: {}); the file is truncated or damaged.",
                cfitsio_text(status)
            ),
        ));
    }
    Ok(hdutype)
}

/// The INHERIT convention (registered with the IAU FITS Working Group; its rules here from
/// memory): an extension with `INHERIT = T` takes the primary header's keywords it does not
/// have itself, except the structural ones (SIMPLE, BITPIX, NAXISn, EXTEND, PCOUNT, GCOUNT),
/// the checksums and the scaling of the primary's own data (BSCALE, BZERO, BLANK); COMMENT and
/// HISTORY cards are not taken. The current HDU stays `index`.
fn inherit_primary(
    fits: &FitsHandle,
    path: &Path,
    index: usize,
    header: &mut Header,
) -> Result<()> {
    move_to(fits, path, 0)?;
    let primary = read_header(fits, path)?;
    move_to(fits, path, index)?;
    let structural = |k: &str| {
        matches!(
            k,
            "SIMPLE"
                | "BITPIX"
                | "EXTEND"
                | "PCOUNT"
                | "GCOUNT"
                | "CHECKSUM"
                | "DATASUM"
                | "BSCALE"
                | "BZERO"
                | "BLANK"
                | "INHERIT"
                | "EXTNAME"
                | "XTENSION"
        ) || k.starts_with("NAXIS")
    };
    for c in primary.cards() {
        let Some(v) = &c.value else { continue };
        if !structural(&c.key) && !header.contains(&c.key) {
            header.set(&c.key, v.clone(), &c.comment);
        }
    }
    Ok(())
}

/// For an extension without `INHERIT = T`: a note naming the keywords a map needs (sky
/// coordinates, unit, beam, wavelength) that the primary header has and the extension lacks,
/// which are then not read, and the fix. The current HDU stays `index`.
fn primary_keys_note(
    fits: &FitsHandle,
    path: &Path,
    index: usize,
    header: &Header,
) -> Result<Option<String>> {
    move_to(fits, path, 0)?;
    let primary = read_header(fits, path)?;
    move_to(fits, path, index)?;
    // Only a primary without data of its own holds keywords for its extensions (the
    // convention's case); a primary image's unit or beam is its own.
    if primary.get_i64("NAXIS").unwrap_or(0) > 0 {
        return Ok(None);
    }
    // Keywords that stand in for each other count as one: the pixel's size (CDELT or a CD
    // matrix) and the rest frequency (RESTFRQ or RESTFREQ).
    let groups: [&[&str]; 8] = [
        &["CTYPE1"],
        &["CTYPE2"],
        &["CRVAL1"],
        &["CRVAL2"],
        &["CDELT1", "CDELT2", "CD1_1", "CD1_2", "CD2_1", "CD2_2"],
        &["BUNIT"],
        &["BMAJ"],
        &["RESTFRQ", "RESTFREQ"],
    ];
    let lacking: Vec<&str> = groups
        .iter()
        .filter_map(|g| {
            let in_primary = g.iter().find(|k| primary.contains(k))?;
            (!g.iter().any(|k| header.contains(k))).then_some(*in_primary)
        })
        .collect();
    Ok((!lacking.is_empty()).then(|| {
        format!(
            "the primary header (HDU 0) has {} that this extension (HDU {index}) lacks, and the extension does not say INHERIT = T, so they are not read (each HDU's header is its own in FITS); if they belong to this image, add INHERIT = T to its header, and cairn takes them",
            lacking.join(", ")
        )
    }))
}

/// Whether the current HDU holds a tile-compressed image (stored as a binary table; FITS
/// Standard 4.0, section 10), which CFITSIO reads as an image.
fn is_compressed_image(fits: &FitsHandle) -> bool {
    let mut status = 0;
    // SAFETY: valid handle.
    unsafe { sys::fits_is_compressed_image(fits.ptr, &mut status) != 0 && status == 0 }
}

/// The header of the current HDU; for a tile-compressed image, the header of the image it
/// holds (its ZBITPIX, ZNAXISn, ... as BITPIX, NAXISn, ..., without the table's keywords),
/// so that the image's keywords, not the table's, describe the map and go to the label maps.
fn read_header(fits: &FitsHandle, path: &Path) -> Result<Header> {
    let mut status = 0;
    let mut text: *mut std::os::raw::c_char = std::ptr::null_mut();
    let mut nkeys = 0;
    let to_string = if is_compressed_image(fits) {
        sys::ffcnvthdr2str
    } else {
        sys::ffhdr2str
    };
    // SAFETY: valid handle; CFITSIO allocates `text`, freed below with fffree.
    unsafe {
        to_string(
            fits.ptr,
            0,
            std::ptr::null_mut(),
            0,
            &mut text,
            &mut nkeys,
            &mut status,
        )
    };
    if status != 0 || text.is_null() {
        return Err(Error::input(
            path,
            format!(
                "its header cannot be read (CFITSIO: {}).",
                cfitsio_text(status)
            ),
        ));
    }
    // SAFETY: NUL-terminated string from CFITSIO.
    let bytes = unsafe { CStr::from_ptr(text) }.to_bytes().to_vec();
    // SAFETY: allocated by CFITSIO.
    unsafe { sys::fffree(text as *mut _, &mut status) };
    // Card by card, so that a stray non-ASCII byte cannot shift the cards after it.
    Ok(Header::parse_bytes(&bytes))
}

/// BITPIX and axis lengths of the current HDU if it is an image.
fn image_shape(fits: &FitsHandle, path: &Path, index: usize) -> Result<(i64, Vec<usize>)> {
    let mut status = 0;
    let mut hdutype = 0;
    // SAFETY: valid handle.
    unsafe { sys::ffghdt(fits.ptr, &mut hdutype, &mut status) };
    if hdutype != sys::IMAGE_HDU as i32 {
        return Err(Error::input(
            path,
            format!("HDU {index} is a table, not an image; choose an image HDU with --hdu."),
        ));
    }
    let mut bitpix = 0;
    let mut naxis = 0;
    // SAFETY: valid handle.
    unsafe {
        sys::ffgidt(fits.ptr, &mut bitpix, &mut status);
        sys::ffgidm(fits.ptr, &mut naxis, &mut status);
    }
    if status != 0 {
        return Err(Error::input(
            path,
            format!(
                "HDU {index} has a damaged image header (CFITSIO: {}).",
                cfitsio_text(status)
            ),
        ));
    }
    let mut sizes = vec![0i64; naxis.max(0) as usize];
    if naxis > 0 {
        // SAFETY: sizes has naxis entries.
        unsafe { sys::ffgiszll(fits.ptr, naxis, sizes.as_mut_ptr(), &mut status) };
    }
    Ok((
        bitpix as i64,
        sizes.into_iter().map(|s| s.max(0) as usize).collect(),
    ))
}

/// A pixel type CFITSIO converts to on reading.
trait ReadPixel: Copy {
    /// CFITSIO's code for the type.
    const DATATYPE: i32;
    /// The value of a null (undefined) pixel.
    const NULL: Self;
}

impl ReadPixel for f32 {
    const DATATYPE: i32 = sys::TFLOAT as i32;
    const NULL: Self = f32::NAN;
}

impl ReadPixel for f64 {
    const DATATYPE: i32 = sys::TDOUBLE as i32;
    const NULL: Self = f64::NAN;
}

/// Reads `out.len()` pixels of the current HDU from `firstpix` (1-based, one entry per axis)
/// on, converted to `T`, null pixels as NaN; the CFITSIO status (0: read).
fn read_pixels<T: ReadPixel>(fits: &FitsHandle, firstpix: &[i64], out: &mut [T]) -> i32 {
    let mut first = firstpix.to_vec();
    let mut nulval = T::NULL;
    let (mut anynul, mut status) = (0, 0);
    // SAFETY: `out` holds out.len() values of the type DATATYPE names; `first` has one entry
    // per axis.
    unsafe {
        sys::ffgpxvll(
            fits.ptr,
            T::DATATYPE,
            first.as_mut_ptr(),
            out.len() as i64,
            &mut nulval as *mut T as *mut _,
            out.as_mut_ptr() as *mut _,
            &mut anynul,
            &mut status,
        )
    };
    status
}

/// Pixels of a 64-bit image read again in double precision, at most this many.
const NARROWING_SAMPLE: usize = 1 << 20;

/// What holding a 64-bit image as 32-bit floats loses, judged on its first pixels (up to
/// [`NARROWING_SAMPLE`]) read again in double precision: neighbouring pixels that differ but
/// read as equal (a large constant offset, such as 1e9 added to values of order 1, leaves
/// 32-bit floats too few digits for the differences), and values below the least normal
/// 32-bit float (about 1.2e-38), which read as zero or lose digits. `None` when nothing
/// that matters is lost (or the sample cannot be read).
fn narrowing_loss(fits: &FitsHandle, firstpix: &[i64], npix: usize) -> Option<String> {
    let n = npix.min(NARROWING_SAMPLE);
    let mut sample = vec![0f64; n];
    if read_pixels(fits, firstpix, &mut sample) != 0 {
        return None;
    }
    let tiny = sample
        .iter()
        .filter(|v| v.is_finite() && **v != 0.0 && v.abs() < f32::MIN_POSITIVE as f64)
        .count();
    // A stray residual (one 1e-300 among ordinary values) is no reason to rescale a map; one
    // value in a hundred of those not zero is.
    let nonzero = sample
        .iter()
        .filter(|v| v.is_finite() && **v != 0.0)
        .count();
    if tiny > 0 && tiny * 100 >= nonzero {
        return Some(format!(
            "{tiny} of the first {n} pixels hold values below the least normal 32-bit float (1.2e-38 in size), in which cairn holds the map: they read as zero or with few digits; give the map in a unit that makes its values larger"
        ));
    }
    let (mut differing, mut merged) = (0usize, 0usize);
    let mut example = None;
    for w in sample.windows(2) {
        let (a, b) = (w[0], w[1]);
        // (Values beyond the range of 32-bit floats are warned about as missing pixels.)
        let held = (a as f32).is_finite() && (b as f32).is_finite();
        if a.is_finite() && b.is_finite() && a != b && held {
            differing += 1;
            if a as f32 == b as f32 {
                merged += 1;
                example.get_or_insert((a, (a - b).abs()));
            }
        }
    }
    // Common practice: a map whose neighbouring pixels read as equal for one in ten of those
    // that differ has lost more than rounding.
    match example {
        Some((v, d)) if merged * 10 > differing => Some(format!(
            "{merged} of {differing} neighbouring pixels that differ among the first {n} read as equal once held as 32-bit floats, as cairn holds maps (values near {} that differ by {}, beyond 32-bit precision there): subtract the map's constant offset, or scale it, before giving it to cairn",
            crate::units::tidy(v),
            crate::units::tidy(d)
        )),
        _ => None,
    }
}

/// The HDU to read, and a warning when the choice was not the only one: other images in the
/// file (read without --hdu), or several HDUs of the name given.
fn choose_hdu(
    fits: &FitsHandle,
    path: &Path,
    choice: &HduChoice,
    nhdu: usize,
) -> Result<(usize, Option<String>)> {
    match choice {
        HduChoice::Index(i) => {
            if *i >= nhdu {
                return Err(Error::input(
                    path,
                    format!(
                        "has {nhdu} HDUs (0 to {}), so --hdu {i} does not exist.",
                        nhdu - 1
                    ),
                ));
            }
            Ok((*i, None))
        }
        HduChoice::Name(name) => {
            let mut names = Vec::new();
            let mut found = Vec::new();
            for i in 0..nhdu {
                move_to(fits, path, i)?;
                let h = read_header(fits, path)?;
                if let Some(n) = h.get_str("EXTNAME") {
                    if n.eq_ignore_ascii_case(name) {
                        found.push(i);
                    }
                    names.push(n.to_string());
                }
            }
            if let Some(&first) = found.first() {
                let note = (found.len() > 1).then(|| {
                    format!(
                        "{} has {} HDUs named '{name}' ({}); the first, HDU {first}, was read: choose another with --hdu N",
                        path.display(),
                        found.len(),
                        found.iter().map(|i| format!("HDU {i}")).collect::<Vec<_>>().join(", ")
                    )
                });
                return Ok((first, note));
            }
            let known = if names.is_empty() {
                "none".to_string()
            } else {
                names.join(", ")
            };
            Err(Error::input(
                path,
                format!(
                    "has no HDU named '{name}' (EXTNAMEs present: {known}); choose one with --hdu NAME or --hdu N."
                ),
            ))
        }
        HduChoice::Auto => {
            // HDUs with data, and among them the images: two axes or more longer than one
            // pixel. The first image is read (a 1-D array before it is passed over); with no
            // image, the first HDU with data, whose reading then says what it holds.
            let mut with_data = Vec::new();
            let mut images = Vec::new();
            for i in 0..nhdu {
                let hdutype = move_to(fits, path, i)?;
                if hdutype != sys::IMAGE_HDU as i32 {
                    continue;
                }
                let (_, axes) = image_shape(fits, path, i)?;
                if !axes.is_empty() && axes.iter().all(|&a| a > 0) {
                    with_data.push(i);
                    if axes.iter().filter(|&&a| a > 1).count() >= 2 {
                        images.push((i, axes));
                    }
                }
            }
            if let Some((first, axes)) = images.first() {
                let shape = |a: &[usize]| {
                    a.iter()
                        .map(|n| n.to_string())
                        .collect::<Vec<_>>()
                        .join(" x ")
                };
                let note = (images.len() > 1).then(|| {
                    format!(
                        "{} holds {} images ({}); the first, HDU {first} ({}), was read: choose another with --hdu N or --hdu EXTNAME",
                        path.display(),
                        images.len(),
                        images
                            .iter()
                            .map(|(i, a)| format!("HDU {i}: {}", shape(a)))
                            .collect::<Vec<_>>()
                            .join(", "),
                        shape(axes)
                    )
                });
                return Ok((*first, note));
            }
            if let Some(&first) = with_data.first() {
                return Ok((first, None));
            }
            Err(Error::input(
                path,
                "holds no image data in any HDU; give a FITS file with an image.",
            ))
        }
    }
}

/// Decides which 2-D slice to read: returns (nx, ny, first pixel (1-based), plane).
fn plan_read(
    path: &Path,
    header: &Header,
    axes: &[usize],
    plane: Option<usize>,
) -> Result<(usize, usize, Vec<i64>, Option<usize>)> {
    match axes.len() {
        0 => {
            return Err(Error::input(
                path,
                "has no image data (NAXIS = 0) in this HDU; choose another with --hdu.",
            ));
        }
        1 => {
            return Err(Error::input(
                path,
                format!(
                    "holds a one-dimensional array (NAXIS = 1, {} values), not an image; give a 2-D map.",
                    axes[0]
                ),
            ));
        }
        _ => {}
    }
    let (nx, ny) = (axes[0], axes[1]);
    if nx == 0 || ny == 0 {
        return Err(Error::input(
            path,
            "has an empty image (an axis of length 0).",
        ));
    }
    let long: Vec<usize> = (2..axes.len()).filter(|&k| axes[k] > 1).collect();
    let mut first = vec![1i64; axes.len()];
    let axis_name = |k: usize| {
        header
            .get_str(&format!("CTYPE{}", k + 1))
            .map(|s| s.trim().to_string())
            .filter(|s| !s.is_empty())
    };
    // A cube whose sky axes are not the first two (a spectral axis first): no plane of it is
    // a map, so the plane hint would mislead.
    let celestial = |k: usize| {
        axis_name(k).is_some_and(|t| {
            let t = t.to_ascii_uppercase();
            ["RA", "DEC", "GLON", "GLAT", "ELON", "ELAT"]
                .iter()
                .any(|p| t == *p || t.starts_with(&format!("{p}-")))
        })
    };
    if let Some(k) = (2..axes.len()).find(|&k| celestial(k) && axes[k] > 1)
        && let Some(j) = (0..2).find(|&j| !celestial(j) && axis_name(j).is_some())
    {
        return Err(Error::input(
            path,
            format!(
                "has a sky axis beyond the first two (CTYPE{} = '{}') and CTYPE{} = '{}' among them; cairn reads maps whose first two axes are the sky: reorder the cube's axes so that they come first.",
                k + 1,
                axis_name(k).unwrap_or_default(),
                j + 1,
                axis_name(j).unwrap_or_default()
            ),
        ));
    }
    match (long.len(), plane) {
        (0, None) => Ok((nx, ny, first, None)),
        (0, Some(p)) => {
            if p == 0 {
                Ok((nx, ny, first, None))
            } else {
                Err(Error::usage(format!(
                    "--plane {p} was given but {} is a single image (plane 0 only).",
                    path.display()
                )))
            }
        }
        (1, Some(p)) => {
            let k = long[0];
            if p >= axes[k] {
                return Err(Error::usage(format!(
                    "--plane {p} is outside axis {} of {}, which has planes 0 to {}.",
                    k + 1,
                    path.display(),
                    axes[k] - 1
                )));
            }
            first[k] = p as i64 + 1;
            Ok((nx, ny, first, Some(p)))
        }
        (1, None) => {
            let k = long[0];
            let name = axis_name(k).map(|n| format!(" ({n})")).unwrap_or_default();
            // A Stokes axis: the plane of Stokes I (value 1, FITS WCS paper I table 7), the
            // total intensity a dust map holds, named.
            let stokes_i = (axis_name(k).is_some_and(|n| n.eq_ignore_ascii_case("STOKES")))
                .then(|| {
                    let get =
                        |key: &str, d: f64| header.get_f64(&format!("{key}{}", k + 1)).unwrap_or(d);
                    let (crval, crpix, cdelt) =
                        (get("CRVAL", 1.0), get("CRPIX", 1.0), get("CDELT", 1.0));
                    let p = (1.0 - crval) / cdelt + crpix - 1.0;
                    (p.is_finite() && p >= 0.0 && p.fract() == 0.0 && (p as usize) < axes[k])
                        .then_some(p as usize)
                })
                .flatten()
                .map(|p| format!(", Stokes I (total intensity) being plane {p}"))
                .unwrap_or_default();
            Err(Error::input(
                path,
                format!(
                    "is a cube: axis {}{name} has {} planes; choose one with --plane K (0 to {}){stokes_i}.",
                    k + 1,
                    axes[k],
                    axes[k] - 1
                ),
            ))
        }
        _ => Err(Error::input(
            path,
            format!(
                "has {} axes longer than 1 beyond the first two (lengths {:?}), and --plane chooses along one only; cut out one 2-D plane first (with astropy or a FITS tool, keeping the header's celestial axes) and give that file.",
                long.len(),
                &axes[2..]
            ),
        )),
    }
}

/// Reads the beam from BMAJ/BMIN/BPA (degrees), or from the last AIPS-style
/// `HISTORY ... BMAJ= x BMIN= y BPA= z` card (common practice in interferometer images).
pub fn beam_from_header(h: &Header) -> std::result::Result<Option<Beam>, String> {
    for key in ["BMAJ", "BMIN", "BPA"] {
        if h.get(key).is_some() && h.get_f64(key).is_none() {
            return Err(format!("its header's {key} is not a number"));
        }
    }
    let from_keys = match (h.get_f64("BMAJ"), h.get_f64("BMIN")) {
        (Some(a), Some(b)) => Some((a, b, h.get_f64("BPA").unwrap_or(0.0))),
        (Some(a), None) => Some((a, a, h.get_f64("BPA").unwrap_or(0.0))),
        _ => None,
    };
    let found = from_keys.or_else(|| {
        h.cards()
            .iter()
            .rev()
            .filter(|c| c.key == "HISTORY" && c.comment.contains("BMAJ="))
            .find_map(|c| {
                let get = |k: &str| -> Option<f64> {
                    let p = c.comment.find(k)? + k.len();
                    c.comment[p..].split_whitespace().next()?.parse().ok()
                };
                Some((get("BMAJ=")?, get("BMIN=")?, get("BPA=").unwrap_or(0.0)))
            })
    });
    match found {
        None => Ok(None),
        Some((a, b, pa)) => {
            let beam = Beam::from_axes(a, b, pa);
            beam.check()
                .map(|_| Some(beam))
                .map_err(|e| format!("its header gives an unusable beam: {e}"))
        }
    }
}

/// Metres per unit of CUNITn on a WAVE axis, and Hz per unit on a FREQ axis (an empty or
/// unknown unit counts as the FITS default, m or Hz).
fn spectral_unit_factor(freq: bool, cunit: &str) -> Option<f64> {
    // Older headers write units in capitals (`GHZ`, `MHZ` for megahertz, `UM`), which WCSLIB
    // also reads; a unit in capitals is matched without case (among these units no two
    // differ by case alone but mHz against MHz, and MHZ is megahertz in such headers).
    let all_caps = cunit.chars().any(|c| c.is_ascii_alphabetic())
        && !cunit.chars().any(|c| c.is_ascii_lowercase());
    let canonical = |names: &[&'static str]| -> &'static str {
        names
            .iter()
            .find(|n| **n == cunit || (all_caps && n.eq_ignore_ascii_case(cunit)))
            .copied()
            .unwrap_or("?")
    };
    if freq {
        match canonical(&["Hz", "THz", "GHz", "MHz", "kHz"]) {
            _ if cunit.is_empty() => Some(1.0),
            "Hz" => Some(1.0),
            "THz" => Some(1e12),
            "GHz" => Some(1e9),
            "MHz" => Some(1e6),
            "kHz" => Some(1e3),
            _ => None,
        }
    } else {
        match canonical(&["m", "um", "mm", "cm", "nm", "Angstrom"]) {
            _ if cunit.is_empty() => Some(1.0),
            "m" => Some(1.0),
            "um" => Some(1e-6),
            "mm" => Some(1e-3),
            "cm" => Some(1e-2),
            "nm" => Some(1e-9),
            "Angstrom" => Some(1e-10),
            _ => None,
        }
    }
}

/// Whether a header key is a CDi_j (`cd = true`) or PCi_j keyword of the primary description.
fn is_matrix_key(key: &str, cd: bool) -> bool {
    let rest = if cd {
        key.strip_prefix("CD")
    } else {
        key.strip_prefix("PC")
    };
    match rest.and_then(|r| r.split_once('_')) {
        Some((i, j)) => {
            !i.is_empty()
                && !j.is_empty()
                && i.bytes().all(|b| b.is_ascii_digit())
                && j.bytes().all(|b| b.is_ascii_digit())
        }
        None => false,
    }
}

/// The wavelength in metres of zero-based `plane` along image axis `axis` (1-based) when that
/// axis is a FREQ or WAVE axis with a CRVAL: `None` when it is not (the caller then reads the
/// header as for a map), `Some(None)` when it is but the plane's value cannot be worked out
/// (a warning says so).
///
/// Following the FITS WCS papers (Greisen & Calabretta 2002, section 2; Greisen et al. 2006,
/// sections 3.1 and 3.2) as wcslib and astropy.wcs read them: the intermediate coordinate is
/// w = s (p - CRPIXn) with p the 1-based pixel (plane + 1) and s = CDn_n when the CD matrix
/// is used, else PCn_n CDELTn (defaults 1); a linear axis has the value CRVALn + w, a -LOG
/// axis CRVALn exp(w / CRVALn). Other algorithms (F2W, V2F, TAB, ...) are known only at the
/// reference pixel.
pub fn plane_wavelength(
    h: &Header,
    axis: usize,
    plane: usize,
    warnings: &mut Vec<String>,
) -> Option<Option<f64>> {
    let ctype = h
        .get_str(&format!("CTYPE{axis}"))
        .unwrap_or("")
        .trim()
        .to_ascii_uppercase();
    let (kind, algorithm) = match ctype.split_once('-') {
        Some((k, a)) => (k.to_string(), a.trim_start_matches('-').to_string()),
        None => (ctype.clone(), String::new()),
    };
    let freq = match kind.as_str() {
        // The long spellings are not the standard's but appear in older headers (a linear
        // axis, as cairn read them before).
        "FREQ" | "FREQUENCY" => true,
        "WAVE" | "WAVELENGTH" => false,
        _ => return None,
    };
    let crval = h.get_f64(&format!("CRVAL{axis}"))?;
    // The standard's default reference pixel is 0 (FITS WCS Paper I, Greisen & Calabretta
    // 2002; from memory, and astropy.wcs reads it so), which puts pixel 1 one step from
    // CRVALn: said in a warning, as a header that leaves CRPIXn out may have meant CRVALn at
    // pixel 1.
    let crpix = h.get_f64(&format!("CRPIX{axis}"));
    let crpix_missing = crpix.is_none();
    let crpix = crpix.unwrap_or(0.0);
    let uses_cd = h.cards().iter().any(|c| is_matrix_key(&c.key, true))
        && !h.cards().iter().any(|c| is_matrix_key(&c.key, false));
    let step = if uses_cd {
        // A missing CDn_n of an otherwise uncoupled axis is 1, as wcslib's cdfix makes it.
        h.get_f64(&format!("CD{axis}_{axis}")).unwrap_or(1.0)
    } else {
        h.get_f64(&format!("CDELT{axis}")).unwrap_or(1.0)
            * h.get_f64(&format!("PC{axis}_{axis}")).unwrap_or(1.0)
    };
    let coupled = (1..=h.get_i64("NAXIS").unwrap_or(0).max(0) as usize)
        .filter(|&j| j != axis)
        .any(|j| {
            let key = if uses_cd {
                format!("CD{axis}_{j}")
            } else {
                format!("PC{axis}_{j}")
            };
            h.get_f64(&key).is_some_and(|v| v != 0.0)
        });
    let offset = plane as f64 + 1.0 - crpix;
    let value = match algorithm.as_str() {
        // The AIPS convention's frame suffixes (FREQ-LSR, FREQ-OBS, ...) name the rest frame
        // of a linear axis (common practice in radio images).
        "" | "LSR" | "LSRK" | "LSRD" | "OBS" | "HEL" | "BAR" | "GEO" | "TOP" => {
            Some(crval + step * offset)
        }
        "LOG" if crval > 0.0 => Some(crval * (step * offset / crval).exp()),
        _ if offset == 0.0 => Some(crval),
        _ => None,
    };
    let cunit = h
        .get_str(&format!("CUNIT{axis}"))
        .unwrap_or("")
        .trim()
        .to_string();
    let Some(factor) = spectral_unit_factor(freq, &cunit) else {
        warnings.push(format!(
            "CUNIT{axis} = '{cunit}' on the spectral axis is not a unit cairn reads, so the wavelength is unknown; give --wavelength"
        ));
        return Some(None);
    };
    let value = value
        .filter(|v| v.is_finite() && *v > 0.0)
        .map(|v| v * factor);
    let Some(v) = value else {
        warnings.push(format!(
            "the wavelength of plane {plane} along axis {axis} (CTYPE{axis} = '{ctype}') is not known to cairn; give --wavelength"
        ));
        return Some(None);
    };
    if crpix_missing && step * offset != 0.0 {
        warnings.push(format!(
            "CRPIX{axis} is missing, so by the FITS standard's default of 0 the plane lies {} from CRVAL{axis}, at {} {}; give --wavelength if CRVAL{axis} was meant",
            if offset == 1.0 { "one step".to_string() } else { format!("{offset} steps") },
            crate::table::fmt_f64(v / factor),
            if cunit.is_empty() { if freq { "Hz" } else { "m" } } else { cunit.as_str() },
        ));
    }
    if coupled {
        warnings.push(format!(
            "axis {axis} (CTYPE{axis} = '{ctype}') is coupled to other axes by the PC or CD matrix, so the wavelength varies across the map; cairn uses its value at the reference pixel of those axes"
        ));
    }
    let m = if freq { units::C_LIGHT / v } else { v };
    if !plausible_wavelength(m) {
        warnings.push(format!(
            "axis {axis} (CTYPE{axis} = '{ctype}') gives plane {plane} a wavelength of {}, outside 1 um to 10 m (300 THz to 30 MHz) where dust continuum maps lie, so it is not used (check CUNIT{axis}: without it the axis is in {}); give --wavelength, such as 850um",
            describe_length(m),
            if freq { "Hz" } else { "m" }
        ));
        return Some(None);
    }
    Some(Some(m))
}

/// Reads the wavelength in metres from the header: a length-1 spectral axis with CTYPEn FREQ
/// or WAVE (its value at its one pixel, p = 1, as [`plane_wavelength`] works it out, so a
/// CRPIXn other than 1 counts as it does in astropy.wcs), else RESTFRQ/RESTFREQ/FREQ/OBSFREQ
/// (Hz), else WAVELEN/WAVELNTH with the unit its comment gives (`keyword_wavelength`). The
/// axis comes first, as for the planes of a cube: it is where the map was observed, while a
/// rest frequency belongs to a spectral line. A wavelength outside [`WAVELENGTH_RANGE_M`] is
/// not used (the next keyword is tried), with a warning when no keyword gives one.
pub fn wavelength_from_header(h: &Header, warnings: &mut Vec<String>) -> Option<f64> {
    // What the axis says about itself: kept with its value, or, when it gives none, kept
    // only if no keyword below gives one either.
    let mut axis_notes = Vec::new();
    for k in 3..=4 {
        match plane_wavelength(h, k, 0, &mut axis_notes) {
            Some(Some(w)) => {
                warnings.append(&mut axis_notes);
                return Some(w);
            }
            Some(None) => break,
            None => {}
        }
    }
    let from_keywords = keyword_wavelength(h, warnings);
    if from_keywords.is_none() {
        warnings.append(&mut axis_notes);
    }
    from_keywords
}

/// The wavelengths a header may give, in metres: 1 um to 10 m (300 THz to 30 MHz), where
/// dust continuum maps lie, the range `--wavelength` and `--opacity-frequency` take. A
/// header value outside it (a frequency in GHz where FITS asks for Hz, a wavelength in nm
/// read as um) is not used, with a warning naming the keyword.
pub const WAVELENGTH_RANGE_M: (f64, f64) = (1e-6, 10.0);

/// Whether a wavelength in metres lies in [`WAVELENGTH_RANGE_M`].
fn plausible_wavelength(m: f64) -> bool {
    (WAVELENGTH_RANGE_M.0..=WAVELENGTH_RANGE_M.1).contains(&m)
}

/// A length as people read it: `850 um`, `1.3 mm`, `3 m`, `1303 km`.
fn describe_length(m: f64) -> String {
    let (v, u) = if m >= 1e3 {
        (m / 1e3, "km")
    } else if m >= 1.0 {
        (m, "m")
    } else if m >= 1e-3 {
        (m * 1e3, "mm")
    } else if m >= 1e-6 {
        (m * 1e6, "um")
    } else {
        (m * 1e9, "nm")
    };
    // Four significant digits.
    let decimals = (3 - v.log10().floor() as i32).max(0) as usize;
    let t = format!("{v:.decimals$}");
    let t = if t.contains('.') {
        t.trim_end_matches('0').trim_end_matches('.')
    } else {
        &t
    };
    format!("{t} {u}")
}

/// Metres per unit of a length unit named in a header comment: the spellings of astropy
/// 8.0.2's units that cairn reads (`m`, `cm`, `mm`, `um`, `nm`, `Angstrom`, `micron`, and
/// `meter`, `centimeter`, `millimeter`, `micrometer`, `nanometer`), and `microns`, common in
/// headers. A name in capitals (`UM`, `MICRON`), as older headers write units, is matched
/// without case, as for the spectral axis's CUNIT.
fn length_unit_m(name: &str) -> Option<f64> {
    const UNITS: [(&str, f64); 14] = [
        ("m", 1.0),
        ("cm", 1e-2),
        ("mm", 1e-3),
        ("um", 1e-6),
        ("nm", 1e-9),
        ("Angstrom", 1e-10),
        ("angstrom", 1e-10),
        ("micron", 1e-6),
        ("microns", 1e-6),
        ("meter", 1.0),
        ("centimeter", 1e-2),
        ("millimeter", 1e-3),
        ("micrometer", 1e-6),
        ("nanometer", 1e-9),
    ];
    let all_caps = name.chars().any(|c| c.is_ascii_alphabetic())
        && !name.chars().any(|c| c.is_ascii_lowercase());
    UNITS
        .iter()
        .find(|(n, _)| *n == name || (all_caps && n.eq_ignore_ascii_case(name)))
        .map(|&(_, f)| f)
}

/// What a keyword's comment says of its unit.
#[derive(Debug, Clone, PartialEq)]
enum CommentUnit {
    /// A length unit cairn reads: metres per unit, and the unit as written.
    Known(f64, String),
    /// A unit in brackets that cairn does not read as a length, as written.
    Unknown(String),
    /// Several different length units named in the words of the comment.
    Ambiguous(Vec<String>),
    /// No unit.
    None,
}

/// The unit of a keyword from its comment. The FITS Standard 4.0, section 4.3.2, recommends
/// the unit in square brackets at the start of the comment (`/ [um] wavelength`); a unit in
/// brackets elsewhere in the comment is read too (`/ wavelength of the map [m]`). Without
/// brackets, a whole word of the comment that names a length unit (`/ wavelength in
/// microns`) is taken when it is the only one named; a unit is never matched inside a word
/// (`spectrum` does not name um).
fn comment_unit(comment: &str) -> CommentUnit {
    let t = comment.trim();
    let bracketed = t
        .find('[')
        .and_then(|i| t[i + 1..].find(']').map(|j| t[i + 1..i + 1 + j].trim()));
    if let Some(u) = bracketed {
        return match length_unit_m(u) {
            Some(f) => CommentUnit::Known(f, u.to_string()),
            None => CommentUnit::Unknown(u.to_string()),
        };
    }
    // A word in capitals is read without case (`in MM`, `WAVELENGTH IN MICRONS`), but never
    // a single letter: an initial (`M. Smith`) is no metre.
    let mut found: Vec<(f64, String)> = Vec::new();
    let mut rest = t;
    let mut words: Vec<&str> = Vec::new();
    // Words, less those after an apostrophe (the `m` of `I'm` is no metre).
    while let Some(start) = rest.find(|c: char| c.is_ascii_alphanumeric()) {
        let after_apostrophe = rest[..start].ends_with('\'');
        let tail = &rest[start..];
        let end = tail
            .find(|c: char| !c.is_ascii_alphanumeric())
            .unwrap_or(tail.len());
        if !after_apostrophe {
            words.push(&tail[..end]);
        }
        rest = &tail[end..];
    }
    for w in words {
        let exact_case = w.len() < 2;
        let f = if exact_case {
            length_unit_m(w).filter(|_| w.chars().any(|c| c.is_ascii_lowercase()))
        } else {
            length_unit_m(w)
        };
        if let Some(f) = f
            && !found.iter().any(|(g, _)| *g == f)
        {
            found.push((f, w.to_string()));
        }
    }
    match found.len() {
        0 => CommentUnit::None,
        1 => {
            let (f, w) = found.remove(0);
            CommentUnit::Known(f, w)
        }
        _ => CommentUnit::Ambiguous(found.into_iter().map(|(_, w)| w).collect()),
    }
}

/// The wavelength from RESTFRQ/RESTFREQ/FREQ/OBSFREQ (Hz) or WAVELEN/WAVELNTH (unit in the
/// comment, [`comment_unit`]), for [`wavelength_from_header`]; a value whose wavelength lies
/// outside [`WAVELENGTH_RANGE_M`] is not used.
fn keyword_wavelength(h: &Header, warnings: &mut Vec<String>) -> Option<f64> {
    // What is wrong with the keywords is said only when none of them gives the wavelength.
    let mut notes: Vec<String> = Vec::new();
    // A keyword present with a value that is no frequency or wavelength is said, not dropped
    // without a word.
    let odd = |warnings: &mut Vec<String>, key: &str, v: Option<f64>| {
        if let Some(v) = v
            && !(v.is_finite() && v > 0.0)
        {
            warnings.push(format!(
                "{key} = {v} is not a positive number, so it is not used as the wavelength"
            ));
        } else if v.is_none() && h.get(key).is_some() {
            warnings.push(format!(
                "the header's {key} is not a number (a damaged card?), so it is not used as the wavelength; give --wavelength"
            ));
        }
    };
    let implausible = |key: &str, shown: &str, m: f64, hint: &str| {
        format!(
            "{key} = {shown} gives a wavelength of {}, outside 1 um to 10 m (300 THz to 30 MHz) where dust continuum maps lie, so it is not used{hint}; give --wavelength, such as 850um",
            describe_length(m)
        )
    };
    for key in ["RESTFRQ", "RESTFREQ", "FREQ", "OBSFREQ"] {
        let f = h.get_f64(key);
        odd(&mut notes, key, f);
        if let Some(f) = f.filter(|f| f.is_finite() && *f > 0.0) {
            let m = units::C_LIGHT / f;
            if plausible_wavelength(m) {
                // Other frequency keywords that disagree (a line's rest frequency beside the
                // continuum's, say): which one is taken is said.
                let others: Vec<String> = ["RESTFRQ", "RESTFREQ", "FREQ", "OBSFREQ"]
                    .into_iter()
                    .filter(|k| *k != key)
                    .filter_map(|k| {
                        let g = h.get_f64(k).filter(|g| g.is_finite() && *g > 0.0)?;
                        let differs = plausible_wavelength(units::C_LIGHT / g)
                            && ((g / f) - 1.0).abs() > 1e-3;
                        differs.then(|| format!("{k} = {} GHz", units::tidy(g / 1e9)))
                    })
                    .collect();
                if !others.is_empty() {
                    warnings.push(format!(
                        "the header gives {key} = {} GHz and {}: cairn takes {key}, the first of RESTFRQ, RESTFREQ, FREQ and OBSFREQ; if the map is at another frequency, give --wavelength",
                        units::tidy(f / 1e9),
                        others.join(" and ")
                    ));
                }
                return Some(m);
            }
            let shown = units::tidy(f);
            // The hint of GHz only where that reading is a wavelength cairn would take.
            let hint = if plausible_wavelength(units::C_LIGHT / (f * 1e9)) {
                format!(
                    " ({key} is in Hz, as FITS defines it: if {shown} GHz was meant, give --wavelength {shown}GHz)"
                )
            } else {
                format!(" ({key} is in Hz, as FITS defines it)")
            };
            notes.push(implausible(key, &format!("{shown} Hz"), m, &hint));
        }
    }
    for key in ["WAVELEN", "WAVELNTH"] {
        let v = h.get_f64(key);
        odd(&mut notes, key, v);
        let Some(v) = v.filter(|v| v.is_finite() && *v > 0.0) else {
            continue;
        };
        let comment = h
            .cards()
            .iter()
            .find(|c| c.key == key)
            .map(|c| c.comment.clone())
            .unwrap_or_default();
        let shown = units::tidy(v);
        match comment_unit(&comment) {
            CommentUnit::Known(f, unit) => {
                let m = v * f;
                if plausible_wavelength(m) {
                    return Some(m);
                }
                notes.push(implausible(key, &format!("{shown} {unit}"), m, ""));
            }
            CommentUnit::Unknown(unit) => notes.push(format!(
                "{key} = {shown} is in [{unit}] by its comment, which is not a length unit cairn reads (m, cm, mm, um, micron, nm, Angstrom), so it is not used; give --wavelength"
            )),
            CommentUnit::Ambiguous(names) => notes.push(format!(
                "{key} = {shown} has a comment that names several units ({}), so its unit is unknown and it is not used; give --wavelength",
                names.join(", ")
            )),
            CommentUnit::None => {
                // No unit: micrometres for values of 1 and more, metres below 0.01 (the
                // ways these keywords are written, common practice), and said.
                let (f, unit) = if v >= 1.0 {
                    (1e-6, "um")
                } else if v < 0.01 {
                    (1.0, "m")
                } else {
                    notes.push(format!("{key} = {shown} has no unit in its comment and could be metres or micrometres; give --wavelength"));
                    continue;
                };
                let m = v * f;
                if plausible_wavelength(m) {
                    warnings.push(format!(
                        "{key} = {shown} has no unit in its comment (such as / [um]); it is read as {shown} {unit}: give --wavelength if that is wrong"
                    ));
                    return Some(m);
                }
                notes.push(implausible(
                    key,
                    &shown,
                    m,
                    &format!(" (read as {unit}, as its comment gives no unit)"),
                ));
            }
        }
    }
    warnings.extend(notes);
    None
}

/// Whether a BUNIT that cairn does not parse still names a quantity cairn converts: a column
/// density, an extinction or a dust brightness written with a scale factor (`1e21 cm-2`) or an
/// unfamiliar spelling (`H2/cm2`, `mJy/sqarcmin`, `W m-2 sr-1`). Velocity-integrated units
/// (`K km/s`, `Jy/beam km/s`) are not: they are line maps, measured for their structure.
fn looks_convertible(text: &str) -> bool {
    let t = text.trim().to_ascii_lowercase();
    if ["km/s", "km.s", "km s", "kms", "km*s"]
        .iter()
        .any(|v| t.contains(v))
    {
        return false;
    }
    t.starts_with(|c: char| c.is_ascii_digit() || c == '.')
        || [
            "cm", "jy", "sr", "mag", "m-2", "m**-2", "m^-2", "m2", "erg", "w m", "w/m", "w.m", "h2",
        ]
        .iter()
        .any(|k| t.contains(k))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn beam_option_parses_and_rejects() {
        let b = Beam::parse("18.2arcsec").unwrap();
        assert!((b.major_deg * 3600.0 - 18.2).abs() < 1e-12 && b.major_deg == b.minor_deg);
        let b = Beam::parse("20arcsec,15arcsec,30deg").unwrap();
        assert!((b.major_deg * 3600.0 - 20.0).abs() < 1e-12 && (b.pa_deg - 30.0).abs() < 1e-12);
        assert!(Beam::parse("fast").unwrap_err().contains("--beam 'fast'"));
        assert!(Beam::parse("0arcsec").unwrap_err().contains("positive"));
        assert!(Beam::parse("-3arcsec").is_err());
    }

    #[test]
    fn beam_from_history_card() {
        let text = [
            format!("{:<80}", "BUNIT   = 'Jy/beam '"),
            format!(
                "{:<80}",
                "HISTORY AIPS   CLEAN BMAJ=  5.0000E-04 BMIN=  4.0000E-04 BPA=  30.00"
            ),
        ]
        .concat();
        let b = beam_from_header(&Header::parse(&text)).unwrap().unwrap();
        assert_eq!((b.major_deg, b.minor_deg, b.pa_deg), (5e-4, 4e-4, 30.0));
    }

    /// An ellipse given narrow axis first is the same ellipse: its major axis lies 90 degrees
    /// from the angle given (a Gaussian's widths and position angle, common practice).
    #[test]
    fn a_beam_given_narrow_axis_first_keeps_its_shape() {
        let b = Beam::parse("10arcsec,20arcsec,30deg").unwrap();
        assert!((b.major_deg * 3600.0 - 20.0).abs() < 1e-9);
        assert!((b.minor_deg * 3600.0 - 10.0).abs() < 1e-9);
        assert!((b.pa_deg - 120.0).abs() < 1e-9);
        let b = Beam::parse("10arcsec,20arcsec,120deg").unwrap();
        assert!((b.pa_deg - 30.0).abs() < 1e-9);
    }

    #[test]
    fn wavelength_from_keywords() {
        let mut w = Vec::new();
        let h = Header::parse(&format!("{:<80}", "RESTFRQ =         3.5297E+11"));
        let l = wavelength_from_header(&h, &mut w).unwrap();
        assert!((l - units::C_LIGHT / 3.5297e11).abs() < 1e-15);
        let h = Header::parse(&format!("{:<80}", "WAVELEN =                850.0 / [um]"));
        assert!((wavelength_from_header(&h, &mut w).unwrap() - 850e-6).abs() < 1e-18);
        let h = Header::parse(&format!("{:<80}", "WAVELEN =                 0.5"));
        assert!(wavelength_from_header(&h, &mut w).is_none());
        assert_eq!(w.len(), 1);
        // A negative or zero value is said, not dropped without a word.
        for card in [
            "WAVELEN =               -850.0 / [um]",
            "RESTFRQ =                  0.0",
        ] {
            let mut w = Vec::new();
            let h = Header::parse(&format!("{card:<80}"));
            assert!(wavelength_from_header(&h, &mut w).is_none());
            assert!(
                w.len() == 1 && w[0].contains("not a positive number"),
                "{w:?}"
            );
        }
        // A value that is no number (a damaged card) is said too.
        let mut w = Vec::new();
        let h = Header::parse(&format!("{:<80}", "WAVELEN = 'eight fifty'"));
        assert!(wavelength_from_header(&h, &mut w).is_none());
        assert!(
            w.len() == 1 && w[0].contains("WAVELEN is not a number"),
            "{w:?}"
        );
        // A later keyword that gives the wavelength leaves nothing to say.
        let mut w = Vec::new();
        let h = Header::parse(&format!(
            "{:<80}{:<80}",
            "RESTFRQ = 'unknown'", "WAVELEN =                850.0 / [um]"
        ));
        assert!(wavelength_from_header(&h, &mut w).is_some());
        assert!(w.is_empty(), "{w:?}");
        // A spectral axis in a unit cairn does not read gives no wavelength, and says so
        // (rather than reading the number as Hz).
        let h = Header::parse(
            &[
                format!("{:<80}", "CTYPE3  = 'FREQ    '"),
                format!("{:<80}", "CRVAL3  =                353.0"),
                format!("{:<80}", "CUNIT3  = 'furlong '"),
            ]
            .concat(),
        );
        assert!(wavelength_from_header(&h, &mut w).is_none());
        assert!(w.last().unwrap().contains("CUNIT3 = 'furlong'"), "{w:?}");
        let cards =
            |cs: &[&str]| Header::parse(&cs.iter().map(|c| format!("{c:<80}")).collect::<String>());
        // An axis that gives no value at its pixel (a non-linear one away from its reference
        // pixel) leaves the keywords to say it, with no warning when one does.
        let mut w = Vec::new();
        let h = cards(&[
            "CTYPE3  = 'WAVE-F2W'",
            "CRVAL3  =               0.0008",
            "CDELT3  =               1.0E-5",
            "CRPIX3  =                  2.0",
            "RESTFRQ =         3.5297E+11",
        ]);
        let l = wavelength_from_header(&h, &mut w).unwrap();
        assert!(
            (l - units::C_LIGHT / 3.5297e11).abs() < 1e-15 && w.is_empty(),
            "{w:?}"
        );
        // Without the keyword, the axis's warning.
        let h = cards(&[
            "CTYPE3  = 'WAVE-F2W'",
            "CRVAL3  =               0.0008",
            "CDELT3  =               1.0E-5",
            "CRPIX3  =                  2.0",
        ]);
        assert!(wavelength_from_header(&h, &mut w).is_none());
        assert!(w.len() == 1 && w[0].contains("--wavelength"), "{w:?}");
        // The long spelling of a frequency axis, at its one pixel (the reference pixel).
        let mut w = Vec::new();
        let h = cards(&[
            "CTYPE3  = 'FREQUENCY'",
            "CRVAL3  =              3.53E11",
            "CDELT3  =                1.0E9",
            "CRPIX3  =                  1.0",
        ]);
        let l = wavelength_from_header(&h, &mut w).unwrap();
        assert!(
            (l - units::C_LIGHT / 3.53e11).abs() < 1e-15 && w.is_empty(),
            "{w:?}"
        );
        // A unit in capitals, as older headers write it (WCSLIB reads GHZ as GHz).
        let mut w2 = Vec::new();
        let h = cards(&[
            "CTYPE3  = 'FREQ    '",
            "CUNIT3  = 'GHZ     '",
            "CRVAL3  =                353.0",
            "CRPIX3  =                  1.0",
        ]);
        let l = wavelength_from_header(&h, &mut w2).unwrap();
        assert!(
            (l - units::C_LIGHT / 3.53e11).abs() < 1e-15 && w2.is_empty(),
            "{w2:?}"
        );
        // No CRPIX3: the standard's 0, one step from CRVAL3, and a warning that says so.
        let h = cards(&[
            "CTYPE3  = 'FREQ    '",
            "CUNIT3  = 'GHz     '",
            "CRVAL3  =                353.0",
            "CDELT3  =                 20.0",
        ]);
        let l = wavelength_from_header(&h, &mut w).unwrap();
        assert!((l - units::C_LIGHT / 3.73e11).abs() < 1e-15, "{l}");
        assert!(
            w.len() == 1 && w[0].contains("CRPIX3 is missing") && w[0].contains("373.0 GHz"),
            "{w:?}"
        );
    }

    fn cube_header(extra: &[&str]) -> Header {
        let mut cards = vec!["NAXIS   =                    3".to_string()];
        cards.extend(extra.iter().map(|s| s.to_string()));
        Header::parse(&cards.iter().map(|c| format!("{c:<80}")).collect::<String>())
    }

    #[test]
    fn plane_wavelength_on_linear_log_and_other_axes() {
        let mut w = Vec::new();
        let h = cube_header(&[
            "CTYPE3  = 'FREQ    '",
            "CRVAL3  =              3.5E+11",
            "CDELT3  =              1.0E+11",
            "CRPIX3  =                  2.0",
            "RESTFRQ =              2.3E+11",
        ]);
        for (p, f) in [(0, 2.5e11), (1, 3.5e11), (2, 4.5e11)] {
            let l = plane_wavelength(&h, 3, p, &mut w).unwrap().unwrap();
            assert!((l / (units::C_LIGHT / f) - 1.0).abs() < 1e-15, "plane {p}");
        }
        // A velocity axis: not a FREQ or WAVE axis, so the header is read as for a map.
        let h = cube_header(&["CTYPE3  = 'VRAD    '", "CRVAL3  =                  0.0"]);
        assert_eq!(plane_wavelength(&h, 3, 4, &mut w), None);
        // A FREQ axis without CRVAL3 likewise.
        let h = cube_header(&["CTYPE3  = 'FREQ    '"]);
        assert_eq!(plane_wavelength(&h, 3, 1, &mut w), None);
        assert!(w.is_empty());
        // A non-linear algorithm: known at the reference pixel only.
        let h = cube_header(&[
            "CTYPE3  = 'WAVE-F2W'",
            "CRVAL3  =               0.0008",
            "CDELT3  =               1.0E-5",
            "CRPIX3  =                  1.0",
        ]);
        assert_eq!(plane_wavelength(&h, 3, 0, &mut w), Some(Some(0.0008)));
        assert_eq!(plane_wavelength(&h, 3, 1, &mut w), Some(None));
        assert_eq!(w.len(), 1);
        assert!(
            w[0].contains("plane 1") && w[0].contains("--wavelength"),
            "{}",
            w[0]
        );
        // A WAVE axis in mm with a CD matrix.
        let h = cube_header(&[
            "CTYPE3  = 'WAVE    '",
            "CUNIT3  = 'mm      '",
            "CRVAL3  =                  0.5",
            "CD1_1   =               -0.001",
            "CD2_2   =                0.001",
            "CD3_3   =                 0.25",
            "CRPIX3  =                  1.0",
        ]);
        let l = plane_wavelength(&h, 3, 2, &mut w).unwrap().unwrap();
        assert!((l - 1.0e-3).abs() < 1e-18, "{l}");
    }
}
