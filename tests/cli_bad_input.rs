//! Bad input to `cairn inspect`: one sentence naming the file and the problem, exit code 2,
//! no panic, nothing written. The FITS files here are assembled byte by byte following the
//! FITS Standard 4.0 (2880-byte blocks of 80-character cards, big-endian data).

#[path = "common/cli.rs"]
mod cli;

use cli::{cairn, cairn_limited, check_refused};
use std::path::PathBuf;

/// A FITS file from header cards and big-endian f32 pixels.
fn fits_bytes(cards: &[String], pixels: &[f32]) -> Vec<u8> {
    let mut h = String::new();
    for c in cards {
        h.push_str(&format!("{c:<80}"));
    }
    h.push_str(&format!("{:<80}", "END"));
    while !h.len().is_multiple_of(2880) {
        h.push(' ');
    }
    let mut bytes = h.into_bytes();
    for p in pixels {
        bytes.extend_from_slice(&p.to_be_bytes());
    }
    while !bytes.len().is_multiple_of(2880) {
        bytes.push(0);
    }
    bytes
}

fn image_cards(nx: usize, ny: usize, extra: &[&str]) -> Vec<String> {
    let mut c = vec![
        "SIMPLE  =                    T".to_string(),
        "BITPIX  =                  -32".to_string(),
        "NAXIS   =                    2".to_string(),
        format!("NAXIS1  = {nx:>20}"),
        format!("NAXIS2  = {ny:>20}"),
    ];
    c.extend(extra.iter().map(|s| s.to_string()));
    c
}

fn sky_cards(ctype1: &str, ctype2: &str) -> Vec<String> {
    vec![
        format!("CTYPE1  = '{ctype1}'"),
        format!("CTYPE2  = '{ctype2}'"),
        "CRPIX1  =                  8.0".into(),
        "CRPIX2  =                  8.0".into(),
        "CRVAL1  =                120.0".into(),
        "CRVAL2  =                -30.0".into(),
        "CDELT1  =          -0.00111111".into(),
        "CDELT2  =           0.00111111".into(),
    ]
}

fn good_pixels(n: usize) -> Vec<f32> {
    (0..n).map(|i| ((i * 37) % 101) as f32 * 0.1).collect()
}

struct Scratch {
    dir: tempfile::TempDir,
}

impl Scratch {
    fn new() -> Self {
        Scratch {
            dir: tempfile::tempdir().unwrap(),
        }
    }
    fn write(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.dir.path().join(name);
        std::fs::write(&p, bytes).unwrap();
        p
    }
    fn listing(&self) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(self.dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }
}

/// The rule for bad input ([`check_refused`]), and nothing new in the folder.
fn assert_refused(s: &Scratch, args: &[&str], names: &str, says: &str) {
    let before = s.listing();
    let o = cairn(args, s.dir.path());
    check_refused(&o, args, names, says);
    assert_eq!(s.listing(), before, "{args:?}: nothing written");
}

#[test]
fn not_a_fits_file() {
    let s = Scratch::new();
    s.write("notes.fits", b"these are observing notes, not an image\n");
    assert_refused(
        &s,
        &["inspect", "notes.fits"],
        "notes.fits",
        "is not a FITS file",
    );
    assert_refused(
        &s,
        &["inspect", "absent.fits"],
        "absent.fits",
        "no such file",
    );
}

#[test]
fn truncated_files() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    let full = fits_bytes(&cards, &good_pixels(256));
    s.write("cut_data.fits", &full[..2880 + 500]);
    assert_refused(
        &s,
        &["inspect", "cut_data.fits"],
        "cut_data.fits",
        "is truncated",
    );
    s.write("cut_header.fits", &full[..1000]);
    assert_refused(
        &s,
        &["inspect", "cut_header.fits"],
        "cut_header.fits",
        "truncated",
    );
    // A gzip-compressed file cut in half, and one cut inside its data (CFITSIO opens the part
    // that decompresses and fails reading the pixels): truncated, as a plain file is, with
    // no words of CFITSIO's.
    let gz = std::fs::read(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/fits/gzipped.fits.gz"),
    )
    .unwrap();
    s.write("cut.fits.gz", &gz[..gz.len() / 2]);
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
    std::io::Write::write_all(&mut enc, &full).unwrap();
    let whole = enc.finish().unwrap();
    s.write("cut_data.fits.gz", &whole[..whole.len() - 200]);
    for name in ["cut.fits.gz", "cut_data.fits.gz"] {
        assert_refused(&s, &["inspect", name], name, "is truncated");
        let o = cairn(&["inspect", name], s.dir.path());
        assert!(
            o.stderr.contains("re-download it") && !o.stderr.contains("CFITSIO"),
            "{}",
            o.stderr
        );
    }
    // A gzip-compressed file that is not FITS inside.
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
    std::io::Write::write_all(&mut enc, b"observing notes, not an image\n").unwrap();
    s.write("notes.fits.gz", &enc.finish().unwrap());
    assert_refused(
        &s,
        &["inspect", "notes.fits.gz"],
        "notes.fits.gz",
        "is gzip-compressed but not a compressed FITS file",
    );
}

/// A gzip-compressed map that expands beyond the memory the process may take (512 MB of
/// zeros in a 0.5 MB file, under a 400 MB address-space limit) gets the same sentence, not a
/// crash: CFITSIO cannot tell the two causes apart as it opens the file.
#[test]
fn gzip_expanding_beyond_the_memory_allowed() {
    use std::io::Write as _;
    let s = Scratch::new();
    let (nx, ny) = (8192usize, 16384usize);
    let header = fits_bytes(&image_cards(nx, ny, &[]), &[]);
    let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
    gz.write_all(&header).unwrap();
    let row = vec![0u8; nx * 4];
    for _ in 0..ny {
        gz.write_all(&row).unwrap();
    }
    s.write("huge.fits.gz", &gz.finish().unwrap());
    let before = s.listing();
    let args = ["inspect", "huge.fits.gz"];
    let o = cairn_limited(&args, s.dir.path(), 400_000);
    check_refused(
        &o,
        &args,
        "huge.fits.gz",
        "is gzip-compressed and could not be opened",
    );
    assert!(
        o.stderr
            .contains("more than the memory this process may take")
    );
    assert_eq!(s.listing(), before, "nothing written");
}

/// A map that loads within an address-space limit (`ulimit -v`) but whose segmentation
/// would not fit is refused before any output is begun (the limit leaves at most 173 MB
/// beside the 67 MB map, the run needs about 217 MB by `segment::memory_needed`), instead of
/// ending in a failed allocation's abort with the output folder begun.
#[test]
fn segment_refused_when_its_memory_exceeds_the_address_space_limit() {
    let s = Scratch::new();
    let n = 4096;
    // A unit cairn converts and sky axes, so that the refusal is the one line on stderr.
    let mut cards = image_cards(n, n, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("large.fits", &fits_bytes(&cards, &good_pixels(n * n)));
    let before = s.listing();
    let args = [
        "segment",
        "large.fits",
        "-o",
        "run",
        "--floor",
        "1",
        "--prominence",
        "1",
    ];
    let o = cairn_limited(&args, s.dir.path(), 250_000);
    check_refused(&o, &args, "large.fits", "memory");
    assert_eq!(s.listing(), before, "nothing written, no output folder");
}

#[test]
fn header_claiming_more_data_than_the_file_holds() {
    // 100000 x 100000 float32 would need 40 GB: refused before any allocation.
    let s = Scratch::new();
    let cards = image_cards(100_000, 100_000, &["BUNIT   = 'cm-2'"]);
    s.write("huge_claim.fits", &fits_bytes(&cards, &good_pixels(720)));
    assert_refused(
        &s,
        &["inspect", "huge_claim.fits"],
        "huge_claim.fits",
        "is truncated",
    );
}

#[test]
fn one_dimensional_and_cube() {
    let s = Scratch::new();
    let fx = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("fixtures/fits");
    let line = fx.join("line1d.fits");
    assert_refused(
        &s,
        &["inspect", line.to_str().unwrap()],
        "line1d.fits",
        "NAXIS = 1",
    );
    let cube = fx.join("cube.fits");
    assert_refused(
        &s,
        &["inspect", cube.to_str().unwrap()],
        "cube.fits",
        "--plane",
    );
}

#[test]
fn unknown_projection_code() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---QQQ", "DEC--QQQ"));
    s.write(
        "odd_projection.fits",
        &fits_bytes(&cards, &good_pixels(256)),
    );
    assert_refused(
        &s,
        &["inspect", "odd_projection.fits"],
        "odd_projection.fits",
        "QQQ",
    );
}

/// A map whose BUNIT cairn does not convert to column density, or without BUNIT, was refused
/// with a request for --unit until cairn learnt to segment such maps for their structure alone
/// (line-integrated intensities in K km/s, signal-to-noise maps): now it is segmented, with
/// one warning that names the unit read and says how to give --unit when the header is wrong,
/// and no masses. A --unit cairn does not know is still the option's fault.
#[test]
fn unknown_or_missing_bunit_is_segmented_for_structure_only() {
    let s = Scratch::new();
    s.write(
        "odd_unit.fits",
        &fits_bytes(
            &image_cards(16, 16, &["BUNIT   = 'furlongs'"]),
            &good_pixels(256),
        ),
    );
    s.write(
        "no_unit.fits",
        &fits_bytes(&image_cards(16, 16, &[]), &good_pixels(256)),
    );
    // good_pixels holds 0 to 10 in steps of 0.1: a floor in map units.
    for (f, read) in [
        (
            "odd_unit.fits",
            "BUNIT 'furlongs' is a unit cairn does not convert",
        ),
        ("no_unit.fits", "the map has no BUNIT"),
    ] {
        let o = cairn(
            &[
                "segment",
                f,
                "-o",
                &format!("run-{f}"),
                "--floor",
                "5",
                "-q",
            ],
            s.dir.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        assert!(o.stderr.contains(read), "{}", o.stderr);
        assert!(o.stderr.contains("give --unit"), "{}", o.stderr);
        assert!(o.stdout.contains("no masses:"), "{}", o.stdout);
        assert!(
            s.dir
                .path()
                .join(format!("run-{f}/structures.csv"))
                .is_file()
        );
    }
    // inspect describes such a map, and says why it gives no conversion.
    for f in ["odd_unit.fits", "no_unit.fits"] {
        let o = cairn(&["inspect", f], s.dir.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        assert!(
            o.stdout.contains("no conversion to column density"),
            "{}",
            o.stdout
        );
        assert!(o.stdout.contains("give --unit"), "{}", o.stdout);
    }
    // A unit given on the command line that cairn does not know is the option's fault.
    assert_refused(
        &s,
        &["inspect", "no_unit.fits", "--unit", "furlongs"],
        "--unit 'furlongs'",
        "not understood",
    );
    // With --unit the same file reads.
    let o = cairn(
        &["inspect", "no_unit.fits", "--unit", "MJy/sr"],
        s.dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("surface brightness (from --unit)"),
        "{}",
        o.stdout
    );
}

#[test]
fn negative_or_zero_beam() {
    let s = Scratch::new();
    let cards = image_cards(
        16,
        16,
        &[
            "BUNIT   = 'Jy/beam'",
            "BMAJ    =               -0.001",
            "BMIN    =                0.001",
        ],
    );
    s.write("bad_beam.fits", &fits_bytes(&cards, &good_pixels(256)));
    assert_refused(&s, &["inspect", "bad_beam.fits"], "bad_beam.fits", "beam");
    s.write(
        "ok.fits",
        &fits_bytes(
            &image_cards(16, 16, &["BUNIT   = 'Jy/beam'"]),
            &good_pixels(256),
        ),
    );
    assert_refused(
        &s,
        &["inspect", "ok.fits", "--beam", "0arcsec"],
        "--beam",
        "positive",
    );
}

#[test]
fn nonsense_on_the_command_line() {
    let s = Scratch::new();
    s.write(
        "ok.fits",
        &fits_bytes(
            &image_cards(16, 16, &["BUNIT   = 'Jy/beam'"]),
            &good_pixels(256),
        ),
    );
    assert_refused(
        &s,
        &["inspect", "ok.fits", "--beam", "fast"],
        "--beam 'fast'",
        "18.2arcsec",
    );
    assert_refused(
        &s,
        &["inspect", "ok.fits", "--wavelength", "blue"],
        "--wavelength 'blue'",
        "850um",
    );
    assert_refused(
        &s,
        &["inspect", "ok.fits", "--noise", "loud"],
        "--noise 'loud'",
        "not understood",
    );
}

#[test]
fn all_missing_and_constant_maps_are_reported_plainly() {
    let s = Scratch::new();
    let cards = image_cards(8, 8, &["BUNIT   = 'cm-2'"]);
    s.write("empty.fits", &fits_bytes(&cards, &[f32::NAN; 64]));
    s.write("flat.fits", &fits_bytes(&cards, &[3.0e21; 64]));
    let o = cairn(&["inspect", "empty.fits"], s.dir.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("64 of 64 pixels (100.00%)"),
        "{}",
        o.stdout
    );
    assert!(o.stdout.contains("every pixel is missing"), "{}", o.stdout);
    let o = cairn(&["inspect", "flat.fits", "--json"], s.dir.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let v: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
    assert!(v["noise"]["sigma"].is_null());
    assert!(
        v["noise"]["why_none"]
            .as_str()
            .unwrap()
            .contains("same value"),
        "{}",
        o.stdout
    );
}

/// Mistakes on the command line itself (an unknown option, two options that exclude each
/// other, an unknown command) are one sentence too, pointing at the command's help.
#[test]
fn command_line_mistakes_are_one_sentence() {
    let s = Scratch::new();
    for (args, says) in [
        (
            &["segment", "m.fits", "-o", "run", "--bogus"][..],
            "'--bogus'",
        ),
        (
            &["segment", "m.fits", "-o", "run", "--forc"][..],
            "'--force'",
        ),
        (&["segment", "-o", "run"][..], "<MAP>"),
        (
            &["inspect", "m.fits", "--noise", "1", "--noise-map", "n.fits"][..],
            "cannot be used with",
        ),
        (&["frobnicate"][..], "cairn --help"),
    ] {
        assert_refused(&s, args, "cairn", says);
    }
}

/// Header values that cannot be right are refused with the keyword named: a reference
/// latitude beyond the pole (the FITS WCS Paper II convention: latitudes lie in [-90, 90]) and
/// a beam width that is not a number. A projection cairn does not know says how to fix it.
#[test]
fn impossible_header_values_are_named() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    let pole = cards
        .iter()
        .map(|c| {
            if c.starts_with("CRVAL2") {
                "CRVAL2  =                 95.0".to_string()
            } else {
                c.clone()
            }
        })
        .collect::<Vec<_>>();
    s.write("beyond_pole.fits", &fits_bytes(&pole, &good_pixels(256)));
    assert_refused(
        &s,
        &["inspect", "beyond_pole.fits"],
        "CRVAL2",
        "not a latitude",
    );
    let mut text_beam = cards.clone();
    text_beam.push("BMAJ    = 'abc'".into());
    s.write("text_beam.fits", &fits_bytes(&text_beam, &good_pixels(256)));
    assert_refused(&s, &["inspect", "text_beam.fits"], "BMAJ", "--beam");
    let mut odd = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    odd.extend(sky_cards("RA---QQQ", "DEC--QQQ"));
    s.write("odd.fits", &fits_bytes(&odd, &good_pixels(256)));
    assert_refused(&s, &["inspect", "odd.fits"], "odd.fits", "resample");
}

/// Scaling keywords that cannot scale (FITS Standard 4.0, section 4.4.2.5: BSCALE and BZERO
/// are numbers, BLANK an integer for integer data) are refused by name rather than passed over.
#[test]
fn malformed_scaling_keywords_are_named() {
    let s = Scratch::new();
    for (name, card) in [
        ("bscale_text.fits", "BSCALE  = 'x'"),
        ("bscale_zero.fits", "BSCALE  =                  0.0"),
        ("bzero_nan.fits", "BZERO   =                  NaN"),
    ] {
        let cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'", card]);
        s.write(name, &fits_bytes(&cards, &good_pixels(256)));
        let key = &card[..6];
        assert_refused(&s, &["inspect", name], name, &format!("has {}", key.trim()));
    }
    // Integer data with a BLANK that is not an integer.
    let mut h = String::new();
    for c in [
        "SIMPLE  =                    T",
        "BITPIX  =                   16",
        "NAXIS   =                    2",
        "NAXIS1  =                   16",
        "NAXIS2  =                   16",
        "BUNIT   = 'MJy/sr'",
        "BLANK   =                  1.5",
        "END",
    ] {
        h.push_str(&format!("{c:<80}"));
    }
    let mut bytes = format!("{h:<2880}").into_bytes();
    for i in 0..256i16 {
        bytes.extend_from_slice(&(i % 50).to_be_bytes());
    }
    bytes.resize(2 * 2880, 0);
    s.write("blank_float.fits", &bytes);
    assert_refused(
        &s,
        &["inspect", "blank_float.fits"],
        "blank_float.fits",
        "has BLANK = ",
    );
}

/// A pipe given as the map is refused at once instead of read for ever; a minimum area beyond
/// any count is shown as given, not as the largest count.
#[test]
fn a_pipe_and_an_area_beyond_counting_are_named() {
    let s = Scratch::new();
    let fifo = s.dir.path().join("pipe.fits");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap();
    assert!(made.success());
    assert_refused(
        &s,
        &["inspect", "pipe.fits"],
        "pipe.fits",
        "not a regular file",
    );
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("m.fits", &fits_bytes(&cards, &good_pixels(256)));
    assert_refused(
        &s,
        &["segment", "m.fits", "-o", "out", "--min-area", "1e30px"],
        "--min-area of 1.000e30 pixels",
        "larger than the whole map m.fits (256 pixels)",
    );
}

/// A BUNIT that is not text, and an output folder that is a link to nowhere, are named for what
/// they are.
#[test]
fn a_bunit_that_is_a_number_and_a_dangling_output_link_are_named() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   =                   42"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("n.fits", &fits_bytes(&cards, &good_pixels(256)));
    assert_refused(
        &s,
        &["segment", "n.fits", "-o", "out"],
        "n.fits",
        "has BUNIT = 42, which is not a unit's name",
    );
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("m.fits", &fits_bytes(&cards, &good_pixels(256)));
    std::os::unix::fs::symlink(s.dir.path().join("nowhere"), s.dir.path().join("link")).unwrap();
    assert_refused(
        &s,
        &["segment", "m.fits", "-o", "link"],
        "link",
        "symbolic link to a folder that does not exist",
    );
}

/// Numbers that are not numbers, and option values with no meaning, are refused by name.
#[test]
fn meaningless_option_values_are_refused() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("m.fits", &fits_bytes(&cards, &good_pixels(256)));
    for beta in ["NaN", "1e30", "-1"] {
        assert_refused(
            &s,
            &["inspect", "m.fits", "--beta", beta],
            "--beta",
            "outside 0 to 5",
        );
    }
    // A wavelength where no dust continuum map lies (the emission would overflow).
    for w in ["1e-30um", "0um", "1e12GHz"] {
        assert_refused(
            &s,
            &["inspect", "m.fits", "--wavelength", w],
            &format!("--wavelength {w}"),
            "outside 1um to 10m",
        );
    }
    assert_refused(
        &s,
        &["inspect", "m.fits", "--unit", "furlongs"],
        "--unit",
        "not understood",
    );
}

/// Bytes outside ASCII in a header (FITS allows none, but Latin-1 comments bring them: a
/// degree sign, accented names) are read as placeholders card by card: no panic, and the cards
/// after them (unit, sky coordinates) still count.
#[test]
fn latin1_bytes_in_a_header_shift_nothing() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &[]);
    cards.push("COMMENT # is the degree sign".into());
    cards.push("HISTORY reduced by J. Ma#a at Besan#on".into());
    cards.push("TELESC  = 'T#lescope'".into());
    cards.push("BUNIT   = 'MJy/sr'".into());
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    let mut bytes = fits_bytes(&cards, &good_pixels(256));
    // '#' marks where the Latin-1 bytes go (0xB0 degree sign, 0xEF, 0xE7, 0xE9), one byte
    // each, so the cards keep their 80 bytes.
    let latin1 = [0xb0u8, 0xef, 0xe7, 0xe9];
    let mut k = 0;
    for b in bytes[..2880].iter_mut() {
        if *b == b'#' {
            *b = latin1[k % latin1.len()];
            k += 1;
        }
    }
    assert_eq!(k, 4);
    s.write("latin1.fits", &bytes);
    let o = cairn(&["inspect", "latin1.fits"], s.dir.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stdout.contains("MJy/sr"), "{}", o.stdout);
    assert!(o.stdout.contains("ICRS"), "{}", o.stdout);
}

/// RADESYS = 'J2000' (a common slip for FK5 with EQUINOX = 2000) is no reference system of
/// the FITS WCS (Calabretta & Greisen 2002, A&A 395, 1077, sec. 3.1): the map is read, its
/// positions kept in its own frame, and a warning says so; a system FITS defines gets none.
#[test]
fn a_reference_system_fits_does_not_define_is_named() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'", "RADESYS = 'J2000'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("slip.fits", &fits_bytes(&cards, &good_pixels(256)));
    let o = cairn(&["inspect", "slip.fits"], s.dir.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    // inspect lists its warnings with its report.
    assert!(
        o.stdout
            .contains("warning: RADESYS = 'J2000' is not a reference system FITS defines"),
        "{}",
        o.stdout
    );
    // segment says it on stderr, with --quiet too (which keeps errors and warnings).
    let o = cairn(
        &[
            "segment",
            "slip.fits",
            "-o",
            "run",
            "--floor",
            "5",
            "--no-figure",
            "--quiet",
        ],
        s.dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("warning: RADESYS = 'J2000' is not a reference system FITS defines"),
        "{}",
        o.stderr
    );
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'", "RADESYS = 'FK4-NO-E'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("fk4.fits", &fits_bytes(&cards, &good_pixels(256)));
    let o = cairn(&["inspect", "fk4.fits"], s.dir.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("sky frame       RA/FK4-NO-E"),
        "{}",
        o.stdout
    );
    assert!(!o.stdout.contains("RADESYS"), "{}", o.stdout);
}

/// A negative --hdu or --plane reaches cairn's own check (not the parser's advice to write
/// `-- -1`, which would make -1 the map): one sentence saying how they are counted.
#[test]
fn negative_hdu_and_plane_numbers() {
    let s = Scratch::new();
    s.write(
        "m.fits",
        &fits_bytes(&image_cards(8, 8, &[]), &good_pixels(64)),
    );
    assert_refused(
        &s,
        &["inspect", "m.fits", "--hdu", "-1"],
        "--hdu -1",
        "they are counted from 0",
    );
    assert_refused(
        &s,
        &["segment", "m.fits", "-o", "out", "--plane", "-1"],
        "--plane -1",
        "they are counted from 0",
    );
}

/// A summary that cannot be printed (standard output on a full disk) is an error, exit 2,
/// that says the output files were written in full, as they are.
#[cfg(target_os = "linux")]
#[test]
fn a_full_standard_output_says_the_files_are_whole() {
    let s = Scratch::new();
    s.write(
        "m.fits",
        &fits_bytes(&image_cards(16, 16, &[]), &good_pixels(256)),
    );
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args([
            "segment",
            "m.fits",
            "-o",
            "out",
            "--no-figure",
            "--floor",
            "5",
        ])
        .current_dir(s.dir.path())
        .stdout(std::fs::File::create("/dev/full").unwrap())
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("so the summary is lost, though the output files were written in full"),
        "{stderr}"
    );
    assert!(s.dir.path().join("out/structures.csv").is_file());
    assert!(s.dir.path().join("out/run.json").is_file());
}

/// A cube whose spectral axis comes first (FREQ, RA, DEC) has no plane that is a map: it is
/// refused with the axes named and the fix, not sent to --plane.
#[test]
fn a_cube_with_its_sky_axes_last_is_refused_by_name() {
    let s = Scratch::new();
    let cards: Vec<String> = [
        "SIMPLE  =                    T",
        "BITPIX  =                  -32",
        "NAXIS   =                    3",
        "NAXIS1  =                    3",
        "NAXIS2  =                    8",
        "NAXIS3  =                    8",
        "CTYPE1  = 'FREQ    '",
        "CTYPE2  = 'RA---TAN'",
        "CTYPE3  = 'DEC--TAN'",
    ]
    .iter()
    .map(|c| c.to_string())
    .collect();
    s.write("freqfirst.fits", &fits_bytes(&cards, &good_pixels(3 * 64)));
    assert_refused(
        &s,
        &["inspect", "freqfirst.fits"],
        "freqfirst.fits",
        "has a sky axis beyond the first two (CTYPE3 = 'DEC--TAN') and CTYPE1 = 'FREQ' among them",
    );
}

/// Messages that once repeated what the parser or the reader said now say what was expected:
/// a run folder that is missing or a file, a FITS map given where a JSON or CSV text file is
/// read, a plane that is not a whole number, a beam width that is not positive (named as
/// typed), and a BUNIT of a flux density without its area (the two units meant are named).
#[test]
fn refusals_say_what_was_expected() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("good.fits", &fits_bytes(&cards, &good_pixels(256)));
    assert_refused(&s, &["draw", "nonexist"], "nonexist", "no such folder");
    assert_refused(
        &s,
        &["draw", "good.fits"],
        "good.fits",
        "is a FITS file, not a run folder",
    );
    for (args, says) in [
        (
            &["synth", "-o", "out", "--spec", "good.fits"][..],
            "not a synth specification (a JSON text file)",
        ),
        (
            &[
                "segment",
                "good.fits",
                "-o",
                "out",
                "--thresholds-from",
                "good.fits",
            ][..],
            "not a run record (a JSON text file)",
        ),
        (
            &["compare", "run", "--truth", "good.fits", "-o", "out"][..],
            "not a truth table (a CSV text file)",
        ),
    ] {
        assert_refused(&s, args, "good.fits: is a FITS file", says);
    }
    assert_refused(
        &s,
        &["segment", "good.fits", "-o", "out", "--plane", "abc"],
        "--plane",
        "expected a whole number",
    );
    assert_refused(
        &s,
        &["segment", "good.fits", "-o", "out", "--beam", "-5arcsec"],
        "--beam",
        "FWHM -5arcsec is not a positive width",
    );
    let mut cards = image_cards(16, 16, &["BUNIT   = 'Jy'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("jy.fits", &fits_bytes(&cards, &good_pixels(256)));
    let args = ["segment", "jy.fits", "-o", "out", "--distance", "300pc"];
    assert_refused(
        &s,
        &args,
        "jy.fits",
        "a flux density without the area it is per",
    );
    let o = cairn(&args, s.dir.path());
    assert!(
        o.stderr.contains("--unit Jy/pixel") && o.stderr.contains("--unit Jy/beam"),
        "{}",
        o.stderr
    );
}

/// A map with two extra axes longer than 1 (2 x 2 planes) cannot be read by --plane, which
/// chooses along one: the refusal says so and to cut out one plane first.
#[test]
fn two_long_extra_axes_are_refused_with_the_way_out() {
    let s = Scratch::new();
    let mut cards = vec![
        "SIMPLE  =                    T".to_string(),
        "BITPIX  =                  -32".to_string(),
        "NAXIS   =                    4".to_string(),
        "NAXIS1  =                   16".to_string(),
        "NAXIS2  =                   16".to_string(),
        "NAXIS3  =                    2".to_string(),
        "NAXIS4  =                    2".to_string(),
        "BUNIT   = 'MJy/sr'".to_string(),
    ];
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("hyper.fits", &fits_bytes(&cards, &good_pixels(1024)));
    for args in [
        &["inspect", "hyper.fits"][..],
        &["inspect", "hyper.fits", "--plane", "1"][..],
    ] {
        assert_refused(&s, args, "hyper.fits", "2 axes longer than 1");
        let o = cairn(args, s.dir.path());
        assert!(
            o.stderr.contains("--plane chooses along one only")
                && o.stderr.contains("cut out one 2-D plane first"),
            "{}",
            o.stderr
        );
    }
}

/// A map every pixel of which is the `--missing-value` given has nothing left to segment: the
/// refusal names that option as the cause (not only NaN, BLANK or infinite values).
#[test]
fn segment_of_a_map_that_missing_value_empties_names_the_option() {
    let s = Scratch::new();
    let mut cards = image_cards(16, 16, &["BUNIT   = 'MJy/sr'"]);
    cards.extend(sky_cards("RA---TAN", "DEC--TAN"));
    s.write("zero.fits", &fits_bytes(&cards, &[0.0; 256]));
    assert_refused(
        &s,
        &["segment", "zero.fits", "-o", "run", "--missing-value", "0"],
        "zero.fits",
        "--missing-value 0 given",
    );
}
