//! Synthetic maps with known truth: a log-normal turbulent-like background, injected cores of
//! known mass, beam convolution, conversion to dust emission and white noise.
//!
//! Pipeline (every step in double precision, the result rounded to `f32` at the end):
//!
//! 1. Background: a Gaussian random field g with power spectrum P(k) ~ k^-index (white noise
//!    filtered in Fourier space by |k|^(-index/2), the k = 0 term removed), scaled to zero mean
//!    and unit variance, then made log-normal, N = `<N>` exp(sigma g - sigma^2 / 2), so that
//!    ln N has dispersion sigma and N has mean `<N>` in expectation (common practice for
//!    log-normal column-density fields).
//! 2. Cores are added in H2 column density. Each core's profile (Gaussian, or a projected
//!    Bonnor-Ebert sphere from [`crate::physics::lane_emden`]) is sampled on the pixel grid
//!    (supersampled for small cores), truncated, and normalised on the grid so that
//!    sum(N) * pixel area * mu_H2 * m_H equals the core mass exactly. The pixel area is
//!    (d * pixel angle)^2 (small-angle approximation, common practice).
//! 3. Beam: convolution with the sampled Gaussian beam (separable, out to seven standard
//!    deviations, normalised to unit sum). The background is convolved periodically (by FFT
//!    on the map's own grid), as it is periodic by construction, so its total is conserved.
//!    The cores are convolved linearly, as if the sky beyond the map's edges were empty for
//!    them: each core's stamp directly, term by term, the same convolution that gives its
//!    peak in the truth table. A core near an edge is not seen at the opposite edge; the part
//!    of its light the beam carries beyond the edge is lost from the map.
//! 4. Output units: column density in cm^-2, or optically thin dust emission
//!    I = N mu_H2 m_H kappa_nu B_nu(T) in MJy/sr or Jy/beam (beam solid angle
//!    pi FWHM^2 / (4 ln 2), common practice for a Gaussian beam).
//! 5. White Gaussian noise of the given rms, in output units.
//!
//! Determinism: every random number comes from ChaCha8 seeded by `spec.seed`, with one stream
//! per map row and purpose (background rows, noise rows, the random core population), and all
//! sums are done in a fixed order, so the output is byte-identical whatever the number of
//! rayon threads.
//!
//! World coordinates: a TAN (gnomonic) projection centred on the map, with LONPOLE = 180
//! (Calabretta & Greisen 2002, A&A 395, 1077, sections 2-5). For emission maps the header
//! carries WAVELEN (wavelength in m, a cairn keyword) and RESTFRQ (the frequency in Hz, the
//! FITS WCS Paper III keyword, Greisen et al. 2006, used here for the continuum frequency).

use crate::header::{Card, Header, Value};
use crate::physics::constants::{ARCSEC, C, JY, M_H, M_SUN, PC};
use crate::physics::{BonnorEbertProjection, DustOpacity, LaneEmden, MU_H2, planck_nu};
use ndarray::Array2;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::io::Write;
use std::path::Path;
use std::sync::Arc;

/// Celestial frame of the invented map centre.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Frame {
    /// Equatorial, ICRS (RA---TAN / DEC--TAN, RADESYS = 'ICRS').
    Icrs,
    /// Equatorial, FK5 J2000 (RADESYS = 'FK5', EQUINOX = 2000).
    Fk5,
    /// Galactic (GLON-TAN / GLAT-TAN, no RADESYS).
    Galactic,
}

/// The log-normal background.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Background {
    /// Mean H2 column density [cm^-2].
    pub mean_column_cm2: f64,
    /// Dispersion of ln N.
    pub sigma_ln: f64,
    /// Power-spectrum index: P(k) ~ k^-index of the Gaussian field ln N.
    pub spectral_index: f64,
}

impl Default for Background {
    fn default() -> Self {
        Background {
            mean_column_cm2: 3.0e21,
            sigma_ln: 0.4,
            spectral_index: 3.0,
        }
    }
}

/// Radial profile of an injected core.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", deny_unknown_fields)]
pub enum Profile {
    /// Gaussian column-density profile; the core radius is its half width at half maximum,
    /// truncated at 6 radii.
    Gaussian,
    /// Projected Bonnor-Ebert sphere truncated at `xi_max` (the core radius is the outer
    /// radius). Use [`Profile::critical_bonnor_ebert`] for xi_max = xi_crit.
    BonnorEbert {
        /// Dimensionless truncation radius (0 < xi_max <= 20).
        xi_max: f64,
    },
}

impl Profile {
    /// A critical Bonnor-Ebert sphere (xi_max = xi_crit ~ 6.451).
    pub fn critical_bonnor_ebert() -> Self {
        Profile::BonnorEbert {
            xi_max: LaneEmden::new(7.0, 1e-3).xi_crit(),
        }
    }

    fn name(&self) -> &'static str {
        match self {
            Profile::Gaussian => "gaussian",
            Profile::BonnorEbert { .. } => "bonnor_ebert",
        }
    }
}

/// One core placed by hand.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CoreSpec {
    /// Zero-based pixel column of the centre (centre of the first pixel = 0).
    pub x: f64,
    /// Zero-based pixel row of the centre.
    pub y: f64,
    /// Mass \[M_sun\].
    pub mass_msun: f64,
    /// Radius \[pc\] (meaning depends on the profile).
    pub radius_pc: f64,
    /// Profile.
    pub profile: Profile,
}

/// A random population of cores, drawn with the spec's seed (its own random stream).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CorePopulation {
    /// Number of cores.
    pub count: usize,
    /// Smallest mass \[M_sun\].
    pub mass_min_msun: f64,
    /// Largest mass \[M_sun\].
    pub mass_max_msun: f64,
    /// Index of the mass distribution dN/dM ~ M^-index (2.35 is the Salpeter 1955 slope).
    pub mass_index: f64,
    /// Smallest radius \[pc\] (radii are drawn uniformly in log).
    pub radius_min_pc: f64,
    /// Largest radius \[pc\].
    pub radius_max_pc: f64,
    /// Profile of every core.
    pub profile: Profile,
    /// Distance \[pixels\] kept free from the map edges.
    pub margin_px: f64,
}

/// Unit of dust-emission maps. Written as `"MJyPerSr"` and `"JyPerBeam"` (as every
/// specification has been, so that they read back and reproduce byte for byte); read also in
/// snake case like the other names of a specification (`"mjy_per_sr"`, `"jy_per_beam"`) and as
/// the command line spells them (`"MJy/sr"`, `"Jy/beam"`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum EmissionUnit {
    /// MJy sr^-1.
    #[serde(alias = "mjy_per_sr", alias = "MJy/sr")]
    MJyPerSr,
    /// Jy per beam (needs a beam).
    #[serde(alias = "jy_per_beam", alias = "Jy/beam")]
    JyPerBeam,
}

impl EmissionUnit {
    /// The unit as the command line and BUNIT spell it.
    pub fn text(&self) -> &'static str {
        match self {
            EmissionUnit::MJyPerSr => "MJy/sr",
            EmissionUnit::JyPerBeam => "Jy/beam",
        }
    }
}

/// What the map holds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", deny_unknown_fields)]
pub enum Output {
    /// H2 column density [cm^-2].
    ColumnDensity,
    /// Optically thin dust emission at one wavelength and temperature.
    DustEmission {
        /// Wavelength \[um\].
        wavelength_um: f64,
        /// Dust temperature \[K\].
        temperature_k: f64,
        /// Unit.
        unit: EmissionUnit,
        /// Opacity law.
        #[serde(deserialize_with = "strict_opacity")]
        opacity: DustOpacity,
    },
}

/// [`DustOpacity`]'s fields as a specification holds them, and no others (a misspelt one is
/// refused rather than read as missing).
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct OpacityFields {
    kappa0_cm2_per_g: f64,
    nu0_hz: f64,
    beta: f64,
}

fn strict_opacity<'de, D: serde::Deserializer<'de>>(d: D) -> Result<DustOpacity, D::Error> {
    let o = OpacityFields::deserialize(d)?;
    Ok(DustOpacity {
        kappa0_cm2_per_g: o.kappa0_cm2_per_g,
        nu0_hz: o.nu0_hz,
        beta: o.beta,
    })
}

/// Everything that defines a synthetic map; serialisable so it can be recorded. A field that
/// is not one of these is refused when a specification is read (see [`read_spec`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SynthSpec {
    /// Number of columns.
    pub nx: usize,
    /// Number of rows.
    pub ny: usize,
    /// Pixel size \[arcsec\].
    pub pixel_arcsec: f64,
    /// Longitude of the map centre \[deg\] (invented).
    pub centre_lon_deg: f64,
    /// Latitude of the map centre \[deg\] (invented).
    pub centre_lat_deg: f64,
    /// Celestial frame.
    pub frame: Frame,
    /// Distance \[pc\].
    pub distance_pc: f64,
    /// Beam FWHM \[arcsec\]; 0 for no convolution.
    pub beam_fwhm_arcsec: f64,
    /// Background, or none.
    pub background: Option<Background>,
    /// Cores placed by hand.
    pub cores: Vec<CoreSpec>,
    /// A random population added after `cores`.
    pub population: Option<CorePopulation>,
    /// Output quantity and unit.
    pub output: Output,
    /// White-noise rms in output units.
    pub noise_rms: f64,
    /// Seed of every random stream.
    pub seed: u64,
    /// Mean molecular weight per H2 molecule: a core of mass M holds M / (mu_H2 m_H)
    /// molecules (2.8 by default, as `segment` takes it). Written into the specification only
    /// when it is not the default, so that specifications and maps made before the field
    /// existed (with 2.8) read back and reproduce byte for byte.
    #[serde(default = "default_mu_h2", skip_serializing_if = "is_default_mu_h2")]
    pub mu_h2: f64,
}

fn default_mu_h2() -> f64 {
    MU_H2
}

fn is_default_mu_h2(mu: &f64) -> bool {
    *mu == MU_H2
}

impl Default for SynthSpec {
    fn default() -> Self {
        SynthSpec {
            nx: 256,
            ny: 256,
            pixel_arcsec: 6.0,
            centre_lon_deg: 201.375,
            centre_lat_deg: -31.625,
            frame: Frame::Icrs,
            distance_pc: 250.0,
            beam_fwhm_arcsec: 18.0,
            background: Some(Background::default()),
            cores: Vec::new(),
            population: None,
            output: Output::ColumnDensity,
            noise_rms: 0.0,
            seed: 1,
            mu_h2: MU_H2,
        }
    }
}

/// Reads a specification as `synth` writes it (NAME-spec.json), or as written by hand. Each
/// refusal is one sentence to follow the file's name: text that is not JSON; the injection
/// record that `synth --into` writes under the same name (an injection into a real map has no
/// specification to replay); a field a specification does not have (a misspelt field would
/// otherwise be left out and its default taken without a word); and any other field missing
/// or of the wrong kind.
pub fn read_spec(text: &str) -> Result<SynthSpec, SynthError> {
    let value: serde_json::Value = serde_json::from_str(text).map_err(|e| {
        SynthError(format!(
            "is not JSON ({e}); give a NAME-spec.json that cairn synth wrote, or one written by hand as the README's section on specifications describes"
        ))
    })?;
    if value.get("injected_map").is_some() && value.get("input").is_some() {
        let map = value
            .pointer("/input/path")
            .and_then(|p| p.as_str())
            .unwrap_or("MAP");
        return Err(SynthError(format!(
            "is the record of an injection into {map} made by synth --into, and an injection cannot be replayed with --spec; run the same cairn synth --into command again, with the options this record holds (distance_pc, population, seed, temperature_k, opacity, mu_h2)"
        )));
    }
    serde_json::from_str(text).map_err(|e| SynthError(spec_error_sentence(&e)))
}

/// The sentence for a specification that serde refuses: an unknown field is named with its
/// line, and with the field it was most likely meant to be when only the case or a hyphen
/// differs (`mu_H2` for `mu_h2`).
fn spec_error_sentence(e: &serde_json::Error) -> String {
    let text = e.to_string();
    let ticked = |s: &str| -> Vec<String> {
        s.split('`')
            .skip(1)
            .step_by(2)
            .map(str::to_string)
            .collect()
    };
    if let Some(rest) = text.strip_prefix("unknown field `") {
        let names = ticked(&text);
        let field = rest.split('`').next().unwrap_or("");
        let known: Vec<String> = names.into_iter().skip(1).collect();
        let fold = |s: &str| s.to_ascii_lowercase().replace('-', "_");
        let fix = match known.iter().find(|k| fold(k) == fold(field)) {
            Some(k) => format!("write it `{k}`"),
            None if known.is_empty() => "remove it".to_string(),
            None => format!(
                "the fields there are {}: correct its name or remove it",
                known
                    .iter()
                    .map(|k| format!("`{k}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        };
        return format!(
            "has the field `{field}` at line {}, which a synth specification does not have there; {fix}",
            e.line()
        );
    }
    format!(
        "is not a synth specification ({e}); start from a NAME-spec.json that cairn synth wrote (the README's section on specifications lists its fields)"
    )
}

/// A core as injected, with its measured truth.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TruthCore {
    /// One-based identifier, in injection order.
    pub id: usize,
    /// Zero-based pixel column of the centre.
    pub x: f64,
    /// Zero-based pixel row of the centre.
    pub y: f64,
    /// Longitude \[deg\] of the centre (TAN projection).
    pub lon_deg: f64,
    /// Latitude \[deg\] of the centre.
    pub lat_deg: f64,
    /// Mass \[M_sun\]: exactly what the map holds before the beam (a core cut by the map's
    /// edge is normalised on the pixels inside it). The beam may carry a little of a core
    /// within its reach of an edge beyond the map (see [`reach_px`]); that part is not on the
    /// map, but the mass recorded stays the core's.
    pub mass_msun: f64,
    /// Radius \[pc\].
    pub radius_pc: f64,
    /// Profile name: "gaussian" or "bonnor_ebert".
    pub profile: String,
    /// Peak of this core alone on the map, in output units, after beam convolution, without
    /// background or noise (the linear convolution the map's cores get, over the map's pixels).
    pub peak: f64,
    /// Unit of `peak` (the map's BUNIT).
    pub peak_unit: String,
    /// Peak H2 column density [cm^-2] of the core alone on the grid, before convolution.
    pub peak_column_cm2: f64,
}

/// A synthetic map: data (rows = y, columns = x), header with a celestial WCS, and truth.
#[derive(Debug, Clone)]
pub struct SynthMap {
    /// Pixel values in the units of BUNIT.
    pub data: Array2<f32>,
    /// FITS header cards (including NAXIS cards describing the shape).
    pub header: Header,
    /// The injected cores.
    pub truth: Vec<TruthCore>,
}

/// A spec that cannot be generated; the message says which field is wrong.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthError(pub String);

impl fmt::Display for SynthError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "synthetic map: {}", self.0)
    }
}

impl std::error::Error for SynthError {}

const STREAM_BACKGROUND: u64 = 1 << 32;
const STREAM_NOISE: u64 = 2 << 32;
const STREAM_POPULATION: u64 = 3 << 32;
/// Gaussian truncation in units of the radius (HWHM).
const GAUSS_TRUNCATION: f64 = 6.0;
/// Beam kernel half width in beam sigmas.
const BEAM_HALF_WIDTH_SIGMA: f64 = 7.0;

pub(crate) fn rng(seed: u64, stream: u64) -> ChaCha8Rng {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    r.set_stream(stream);
    r
}

/// Most pixels a synthetic map may have: what the hierarchy engine of `cairn segment` accepts
/// (fewer than 2^31), so that every map synth makes can be segmented.
pub const MAX_PIXELS: usize = (1 << 31) - 1;
/// Most cores (placed by hand plus the random population) a map may hold; also at most one
/// per [`PIXELS_PER_CORE`] pixels.
pub const MAX_CORES: usize = 10_000_000;
/// Least number of pixels per core.
pub const PIXELS_PER_CORE: usize = 4;
/// Widest log-normal background (dispersion of ln N): beyond it the median pixel lies below
/// exp(-12.5) ~ 4e-6 of the mean, nearly all of the background sits in a few pixels and the rest
/// soon underflows.
pub const MAX_SIGMA_LN: f64 = 5.0;
/// Largest |power-spectrum index| of the background: with at most 2^31 pixels a side the
/// filter |k|^(-index/2) and the field's variance then stay within double precision.
pub const MAX_SPECTRAL_INDEX: f64 = 10.0;
/// Peak working memory per pixel while a map is made with a background: the real field
/// (8 bytes) and the two complex buffers of the 2-D transform (16 + 16 bytes). The cores'
/// layer, the background and the f32 map (8 + 8 + 4 bytes) need less.
const BYTES_PER_PIXEL_FFT: u128 = 40;
/// Peak working memory per pixel without a background: the cores' layer (convolved core by
/// core) and the f32 map.
const BYTES_PER_PIXEL_PLAIN: u128 = 12;
/// Working memory per core (its specification, a copy, its truth row).
const BYTES_PER_CORE: u128 = 256;

/// Checks that `name` can be the base name of synth's output files: not empty, no path
/// separator, not starting with '.' (hidden files, `..`), no control character.
pub fn check_name(name: &str) -> Result<(), SynthError> {
    let problem = if name.is_empty() {
        Some("is empty")
    } else if name.contains(['/', '\\']) {
        Some("contains a path separator (choose the folder with -o)")
    } else if name.starts_with('.') {
        Some("starts with '.', which would make hidden files")
    } else if name.chars().any(char::is_control) {
        Some("contains a control character")
    } else {
        None
    };
    match problem {
        Some(p) => Err(SynthError(format!(
            "--name {name:?} {p}: give a plain file name such as velloran, and the folder with -o"
        ))),
        None => Ok(()),
    }
}

/// Total pixels of the map, as a wide integer (never wraps).
fn pixel_count(spec: &SynthSpec) -> u128 {
    spec.nx as u128 * spec.ny as u128
}

/// Estimated peak working memory \[bytes\] of [`generate`] for `spec`.
pub fn memory_needed(spec: &SynthSpec) -> u128 {
    let per_pixel = if spec.background.is_some() {
        BYTES_PER_PIXEL_FFT
    } else {
        BYTES_PER_PIXEL_PLAIN
    };
    let cores = spec.cores.len() as u128 + spec.population.map_or(0, |p| p.count as u128);
    pixel_count(spec)
        .saturating_mul(per_pixel)
        .saturating_add(cores.saturating_mul(BYTES_PER_CORE))
}

fn gigabytes(bytes: u128) -> String {
    let gb = bytes as f64 / 1e9;
    if gb < 10.0 {
        format!("{gb:.1} GB")
    } else if gb >= 1e6 {
        format!("{gb:.1e} GB")
    } else {
        format!("{gb:.0} GB")
    }
}

/// Memory this machine can still give [bytes] (MemAvailable + SwapFree of /proc/meminfo), when
/// known.
fn memory_available() -> Option<u128> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let field = |key: &str| -> Option<u128> {
        let line = text.lines().find(|l| l.starts_with(key))?;
        let kb: u128 = line[key.len()..]
            .trim()
            .trim_end_matches("kB")
            .trim()
            .parse()
            .ok()?;
        Some(kb * 1024)
    };
    Some(field("MemAvailable:")? + field("SwapFree:").unwrap_or(0))
}

/// The refusal when the map's memory cannot be had.
fn out_of_memory(spec: &SynthSpec) -> SynthError {
    SynthError(format!(
        "the map of {} x {} pixels needs about {} of memory while it is made, more than this machine can give: give a smaller --size (nx, ny in a spec file)",
        spec.nx,
        spec.ny,
        gigabytes(memory_needed(spec))
    ))
}

/// A buffer whose allocation may fail without aborting the process.
pub(crate) struct NoMemory;

pub(crate) fn try_filled<T: Clone + Send + Sync>(n: usize, v: T) -> Result<Vec<T>, NoMemory> {
    let mut out = Vec::new();
    out.try_reserve_exact(n).map_err(|_| NoMemory)?;
    out.par_extend(rayon::iter::repeat_n(v, n));
    Ok(out)
}

/// Checks a spec before anything is allocated: shape, memory, numbers, ranges, core count.
/// [`generate`] runs it first; call it before creating outputs to refuse a spec early. Each
/// message names the command-line option (and the field of a spec file) and the fix.
pub fn check(spec: &SynthSpec) -> Result<(), SynthError> {
    validate(spec)?;
    let need = memory_needed(spec);
    if let Some(free) = memory_available()
        && need > free
    {
        return Err(SynthError(format!(
            "the map of {} x {} pixels needs about {} of memory while it is made, more than the {} this machine has free: give a smaller --size (nx, ny in a spec file)",
            spec.nx,
            spec.ny,
            gigabytes(need),
            gigabytes(free)
        )));
    }
    Ok(())
}

fn validate(spec: &SynthSpec) -> Result<(), SynthError> {
    let bad = |m: String| Err(SynthError(m));
    if spec.nx < 2 || spec.ny < 2 {
        return bad(format!(
            "shape {} x {} is too small (at least 2 x 2)",
            spec.nx, spec.ny
        ));
    }
    let npix = pixel_count(spec);
    if npix > MAX_PIXELS as u128 {
        return bad(format!(
            "the map size {} x {} ({npix} pixels, about {} of memory) is more than the {MAX_PIXELS} pixels (2^31 - 1) cairn can segment: give a smaller --size (nx, ny in a spec file), such as 8192 or 16384x8192",
            spec.nx,
            spec.ny,
            gigabytes(memory_needed(spec))
        ));
    }
    let npix = npix as usize;
    // Every number finite (a NaN or infinity gives a map of NaN and a spec that cannot be read
    // back).
    let mut numbers: Vec<(String, f64)> = vec![
        ("--pixel (pixel_arcsec)".into(), spec.pixel_arcsec),
        ("--centre (centre_lon_deg)".into(), spec.centre_lon_deg),
        ("--centre (centre_lat_deg)".into(), spec.centre_lat_deg),
        ("--distance (distance_pc)".into(), spec.distance_pc),
        ("--mu-h2 (mu_h2)".into(), spec.mu_h2),
        ("--beam (beam_fwhm_arcsec)".into(), spec.beam_fwhm_arcsec),
        ("--noise (noise_rms)".into(), spec.noise_rms),
    ];
    if let Some(b) = &spec.background {
        numbers.extend([
            (
                "--background (background.mean_column_cm2)".into(),
                b.mean_column_cm2,
            ),
            (
                "--background-width (background.sigma_ln)".into(),
                b.sigma_ln,
            ),
            (
                "--background-index (background.spectral_index)".into(),
                b.spectral_index,
            ),
        ]);
    }
    let xi = |p: &Profile| match p {
        Profile::BonnorEbert { xi_max } => Some(*xi_max),
        Profile::Gaussian => None,
    };
    for (i, c) in spec.cores.iter().enumerate() {
        let n = i + 1;
        numbers.extend([
            (format!("core {n} of the spec (x)"), c.x),
            (format!("core {n} of the spec (y)"), c.y),
            (format!("core {n} of the spec (mass_msun)"), c.mass_msun),
            (format!("core {n} of the spec (radius_pc)"), c.radius_pc),
        ]);
        if let Some(x) = xi(&c.profile) {
            numbers.push((format!("core {n} of the spec (xi_max)"), x));
        }
    }
    if let Some(p) = &spec.population {
        numbers.extend([
            (
                "--core-mass (population.mass_min_msun)".into(),
                p.mass_min_msun,
            ),
            (
                "--core-mass (population.mass_max_msun)".into(),
                p.mass_max_msun,
            ),
            (
                "--core-mass-index (population.mass_index)".into(),
                p.mass_index,
            ),
            (
                "--core-radius (population.radius_min_pc)".into(),
                p.radius_min_pc,
            ),
            (
                "--core-radius (population.radius_max_pc)".into(),
                p.radius_max_pc,
            ),
            ("population.margin_px".into(), p.margin_px),
        ]);
        if let Some(x) = xi(&p.profile) {
            numbers.push(("population.profile (xi_max)".into(), x));
        }
    }
    if let Output::DustEmission {
        wavelength_um,
        temperature_k,
        opacity,
        ..
    } = &spec.output
    {
        numbers.extend([
            ("--emission (output.wavelength_um)".into(), *wavelength_um),
            (
                "--temperature (output.temperature_k)".into(),
                *temperature_k,
            ),
            (
                "output.opacity.kappa0_cm2_per_g".into(),
                opacity.kappa0_cm2_per_g,
            ),
            ("output.opacity.nu0_hz".into(), opacity.nu0_hz),
            ("output.opacity.beta".into(), opacity.beta),
        ]);
    }
    if let Some((what, v)) = numbers.iter().find(|(_, v)| !v.is_finite()) {
        return bad(format!(
            "{what} is {v}, not a finite number: give a finite value"
        ));
    }
    let pos = |v: f64| v.is_finite() && v > 0.0;
    if let Output::DustEmission {
        wavelength_um,
        temperature_k,
        opacity,
        ..
    } = &spec.output
    {
        // Where dust continuum lies (1 um to 10 m, as segment's --wavelength), a dust
        // temperature between the cosmic background's and dust's sublimation, and an opacity
        // law that stays finite (beta as segment's --beta).
        let ranges = [
            (
                "--emission (output.wavelength_um)",
                *wavelength_um,
                1.0,
                1.0e7,
                "um",
            ),
            (
                "--temperature (output.temperature_k)",
                *temperature_k,
                crate::physics::constants::T_CMB,
                crate::score::T_HOTTEST_K,
                "K",
            ),
            ("output.opacity.beta", opacity.beta, 0.0, 5.0, ""),
        ];
        for (what, v, lo, hi, unit) in ranges {
            if !(lo..=hi).contains(&v) {
                let f = crate::table::fmt_f64;
                return bad(format!(
                    "{what} is {}{unit}, outside {}{unit} to {}{unit}: give a value in that range",
                    f(v),
                    f(lo),
                    f(hi)
                ));
            }
        }
        for (what, v) in [
            ("output.opacity.kappa0_cm2_per_g", opacity.kappa0_cm2_per_g),
            ("output.opacity.nu0_hz", opacity.nu0_hz),
        ] {
            if !pos(v) {
                return bad(format!(
                    "{what} is {v}, not positive: give a positive value"
                ));
            }
        }
    }
    if !pos(spec.pixel_arcsec) {
        return bad(format!(
            "pixel size {} arcsec must be positive",
            spec.pixel_arcsec
        ));
    }
    if !pos(spec.mu_h2) {
        return bad(format!("mu_H2 {} must be positive", spec.mu_h2));
    }
    if !pos(spec.distance_pc) {
        return bad(format!("distance {} pc must be positive", spec.distance_pc));
    }
    if !(spec.beam_fwhm_arcsec.is_finite() && spec.beam_fwhm_arcsec >= 0.0) {
        return bad(format!(
            "beam FWHM {} arcsec must be >= 0",
            spec.beam_fwhm_arcsec
        ));
    }
    let side = spec.nx.min(spec.ny);
    if spec.beam_fwhm_arcsec > side as f64 * spec.pixel_arcsec {
        return bad(format!(
            "--beam (beam_fwhm_arcsec) {} arcsec is wider than the map's shorter side ({side} pixels of {} arcsec): give a beam narrower than {} arcsec or a larger --size",
            spec.beam_fwhm_arcsec,
            spec.pixel_arcsec,
            side as f64 * spec.pixel_arcsec
        ));
    }
    if !(spec.noise_rms.is_finite() && spec.noise_rms >= 0.0) {
        return bad(format!("noise rms {} must be >= 0", spec.noise_rms));
    }
    if !(spec.centre_lat_deg.abs() <= 90.0 && spec.centre_lon_deg.is_finite()) {
        return bad("map centre latitude must lie in [-90, 90] degrees".into());
    }
    if let Some(b) = &spec.background {
        if !(pos(b.mean_column_cm2) && b.sigma_ln.is_finite() && b.sigma_ln >= 0.0) {
            return bad("background needs a positive mean column density and sigma_ln >= 0".into());
        }
        if b.sigma_ln > MAX_SIGMA_LN {
            return bad(format!(
                "--background-width (background.sigma_ln) {} is too wide (above {MAX_SIGMA_LN} nearly all of the background sits in a few pixels and the rest underflows to zero): give at most {MAX_SIGMA_LN}",
                b.sigma_ln
            ));
        }
        if b.spectral_index.abs() > MAX_SPECTRAL_INDEX {
            return bad(format!(
                "--background-index (background.spectral_index) {} is out of range: give a value between -{MAX_SPECTRAL_INDEX} and {MAX_SPECTRAL_INDEX}, such as 3",
                b.spectral_index
            ));
        }
    }
    if let Output::DustEmission {
        wavelength_um,
        temperature_k,
        unit,
        ..
    } = spec.output
    {
        if !pos(wavelength_um) || !pos(temperature_k) {
            return bad("dust emission needs a positive wavelength and temperature".into());
        }
        if unit == EmissionUnit::JyPerBeam && spec.beam_fwhm_arcsec == 0.0 {
            return bad("Jy/beam output needs a beam (beam_fwhm_arcsec > 0)".into());
        }
    }
    let check_profile = |p: &Profile| match p {
        Profile::BonnorEbert { xi_max } if !(*xi_max > 0.0 && *xi_max <= 20.0) => {
            bad(format!("Bonnor-Ebert xi_max {xi_max} must lie in (0, 20]"))
        }
        _ => Ok(()),
    };
    let most_cores = MAX_CORES.min(npix / PIXELS_PER_CORE);
    let placed = spec.cores.len();
    let drawn = spec.population.map_or(0, |p| p.count);
    if placed.saturating_add(drawn) > most_cores {
        let asked = match (placed, drawn) {
            (0, d) => format!("--cores (population.count) {d}"),
            (p, 0) => format!("the spec's {p} placed cores"),
            (p, d) => format!("--cores (population.count) {d} besides the spec's {p} placed cores"),
        };
        return bad(format!(
            "{asked} is more than a map of {} x {} pixels can hold: give at most {most_cores} cores in all (one per {PIXELS_PER_CORE} pixels, at most {MAX_CORES}) or a larger --size",
            spec.nx, spec.ny
        ));
    }
    for (i, c) in spec.cores.iter().enumerate() {
        if !pos(c.mass_msun) || !pos(c.radius_pc) {
            return bad(format!("core {} needs a positive mass and radius", i + 1));
        }
        let inside = |v: f64, n: usize| v >= -0.5 && v <= n as f64 - 0.5;
        if !inside(c.x, spec.nx) || !inside(c.y, spec.ny) {
            return bad(format!(
                "core {} centre ({}, {}) lies outside the map",
                i + 1,
                c.x,
                c.y
            ));
        }
        check_profile(&c.profile)?;
    }
    if let Some(p) = &spec.population {
        for (name, option, lo, hi, unit) in [
            (
                "mass",
                "--core-mass",
                p.mass_min_msun,
                p.mass_max_msun,
                "Msun",
            ),
            (
                "radius",
                "--core-radius",
                p.radius_min_pc,
                p.radius_max_pc,
                "pc",
            ),
        ] {
            if !(pos(lo) && hi >= lo) {
                return bad(format!(
                    "the cores' {name} range ({option}) must have 0 < MIN <= MAX, and it is {}{unit},{}{unit}{}",
                    crate::units::tidy(lo),
                    crate::units::tidy(hi),
                    if pos(hi) && hi < lo {
                        format!(
                            "; give it the other way round, {}{unit},{}{unit}",
                            crate::units::tidy(hi),
                            crate::units::tidy(lo)
                        )
                    } else {
                        String::new()
                    }
                ));
            }
        }
        if !(p.margin_px >= 0.0
            && 2.0 * p.margin_px < spec.nx as f64 - 1.0
            && 2.0 * p.margin_px < spec.ny as f64 - 1.0)
        {
            return bad(format!(
                "a map of {} x {} pixels leaves no room for random cores, which keep {} pixels from every edge (population.margin_px): give a --size of at least {} pixels on each side, or no random cores (or, in a spec file, a smaller margin_px)",
                spec.nx,
                spec.ny,
                p.margin_px,
                (2.0 * p.margin_px).floor() as usize + 2
            ));
        }
        check_profile(&p.profile)?;
    }
    Ok(())
}

/// Draws the random population (its own random stream, independent of the map size).
pub(crate) fn draw_population(p: &CorePopulation, spec: &SynthSpec) -> Vec<CoreSpec> {
    let mut r = rng(spec.seed, STREAM_POPULATION);
    (0..p.count)
        .map(|_| {
            let u: f64 = r.random();
            // Inverse transform of dN/dM ~ M^-a between the limits.
            let a = p.mass_index;
            let mass = if (a - 1.0).abs() < 1e-12 {
                p.mass_min_msun * (p.mass_max_msun / p.mass_min_msun).powf(u)
            } else {
                let e = 1.0 - a;
                let (lo, hi) = (p.mass_min_msun.powf(e), p.mass_max_msun.powf(e));
                (lo + u * (hi - lo)).powf(1.0 / e)
            };
            let v: f64 = r.random();
            let radius = p.radius_min_pc * (p.radius_max_pc / p.radius_min_pc).powf(v);
            let fx: f64 = r.random();
            let fy: f64 = r.random();
            let x = p.margin_px + fx * (spec.nx as f64 - 1.0 - 2.0 * p.margin_px);
            let y = p.margin_px + fy * (spec.ny as f64 - 1.0 - 2.0 * p.margin_px);
            CoreSpec {
                x,
                y,
                mass_msun: mass,
                radius_pc: radius,
                profile: p.profile,
            }
        })
        .collect()
}

/// Least distance \[pixels\] a random population keeps from the edges by default.
pub const MIN_MARGIN_PX: f64 = 10.0;

/// How far a core's mass reaches on a map \[pixels\], from its centre: four standard
/// deviations of a Gaussian core (radius `radius_px`, its half width at half maximum)
/// convolved with a Gaussian beam of standard deviation `sigma_beam_px`, or a Bonnor-Ebert
/// core's outer radius plus four of the beam's; at least one pixel. Beyond a straight line at
/// that distance lies a fraction Phi(-4) = 3.2e-5 of a Gaussian's mass (common practice: the
/// normal distribution's tail), so a core that far from every edge keeps all but about 1e-4
/// of its mass on the map.
pub fn reach_px(radius_px: f64, profile: Profile, sigma_beam_px: f64) -> f64 {
    let reach = match profile {
        Profile::Gaussian => {
            4.0 * (radius_px / (2.0 * std::f64::consts::LN_2).sqrt()).hypot(sigma_beam_px)
        }
        Profile::BonnorEbert { .. } => radius_px + 4.0 * sigma_beam_px,
    };
    reach.max(1.0)
}

/// The margin \[pixels\] a random population of cores up to `radius_max_pc` keeps from the
/// edges of `spec`'s map by default: the widest core's [`reach_px`] (rounded up), at least
/// [`MIN_MARGIN_PX`], so that random cores keep their light on the map. On a map too small
/// for that, the most it leaves room for, still at least [`MIN_MARGIN_PX`]. Returns the margin
/// and the reach, which the margin is less than only on such small maps.
pub fn default_margin_px(spec: &SynthSpec, radius_max_pc: f64, profile: Profile) -> (f64, f64) {
    let pix_m = spec.distance_pc * PC * spec.pixel_arcsec * ARCSEC;
    let sigma_beam_px =
        spec.beam_fwhm_arcsec / spec.pixel_arcsec / (8.0 * std::f64::consts::LN_2).sqrt();
    let reach = reach_px(radius_max_pc * PC / pix_m, profile, sigma_beam_px).ceil();
    // `validate` needs 2 margin < n - 1 on both sides.
    let room = ((spec.nx.min(spec.ny) as f64 - 2.0) / 2.0).floor();
    let margin = if reach.is_finite() {
        reach.min(room).max(MIN_MARGIN_PX)
    } else {
        MIN_MARGIN_PX
    };
    (margin, reach)
}

/// All cores of a spec (hand-placed, then the random population), in injection order.
pub fn all_cores(spec: &SynthSpec) -> Vec<CoreSpec> {
    let mut cores = spec.cores.clone();
    if let Some(p) = &spec.population {
        cores.extend(draw_population(p, spec));
    }
    cores
}

/// World coordinates (lon, lat) \[deg\] of zero-based pixel (x, y) in the TAN projection synth
/// writes for `spec` (Calabretta & Greisen 2002, eqs. 54 and 2, with LONPOLE = 180).
pub fn pixel_to_world(spec: &SynthSpec, x: f64, y: f64) -> (f64, f64) {
    let (crpix1, crpix2) = crpix(spec);
    let cdelt = spec.pixel_arcsec / 3600.0;
    // Intermediate world coordinates [rad]; CDELT1 < 0 (longitude increases to the left).
    let u = (-cdelt * (x + 1.0 - crpix1)).to_radians();
    let v = (cdelt * (y + 1.0 - crpix2)).to_radians();
    let (a0, d0) = (
        spec.centre_lon_deg.to_radians(),
        spec.centre_lat_deg.to_radians(),
    );
    let rho = u.hypot(v);
    if rho == 0.0 {
        return (spec.centre_lon_deg.rem_euclid(360.0), spec.centre_lat_deg);
    }
    // Native spherical coordinates of the gnomonic projection.
    let phi = u.atan2(-v);
    let theta = (1.0 / rho).atan();
    // Native to celestial with the native pole at (phi_p = 180 deg, delta_p = delta_0).
    let dphi = phi - std::f64::consts::PI;
    let lat = (theta.sin() * d0.sin() + theta.cos() * d0.cos() * dphi.cos()).asin();
    let lon = a0
        + (-theta.cos() * dphi.sin())
            .atan2(theta.sin() * d0.cos() - theta.cos() * d0.sin() * dphi.cos());
    (lon.to_degrees().rem_euclid(360.0), lat.to_degrees())
}

fn crpix(spec: &SynthSpec) -> (f64, f64) {
    ((spec.nx as f64 + 1.0) / 2.0, (spec.ny as f64 + 1.0) / 2.0)
}

/// A core rendered on the grid: bounding box and column densities [m^-2].
pub(crate) struct Stamp {
    /// First column of the box.
    pub(crate) x0: usize,
    /// First row of the box.
    pub(crate) y0: usize,
    /// Columns of the box.
    pub(crate) w: usize,
    /// Rows of the box.
    pub(crate) h: usize,
    /// H2 column densities [m^-2], row-major.
    pub(crate) values: Vec<f64>,
}

/// Samples a core's profile on the grid and normalises it to the core mass (the grid of
/// `spec`: its size, square pixels of `pixel_arcsec` and `distance_pc`).
pub(crate) fn render_core(
    core: &CoreSpec,
    spec: &SynthSpec,
    be_cache: &mut Vec<(f64, BonnorEbertProjection)>,
) -> Result<Stamp, NoMemory> {
    let pix_m = spec.distance_pc * PC * spec.pixel_arcsec * ARCSEC;
    let r_px = core.radius_pc * PC / pix_m;
    let extent = match core.profile {
        Profile::Gaussian => GAUSS_TRUNCATION * r_px,
        Profile::BonnorEbert { .. } => r_px,
    };
    let be = match core.profile {
        Profile::BonnorEbert { xi_max } => {
            if !be_cache.iter().any(|(x, _)| *x == xi_max) {
                be_cache.push((xi_max, BonnorEbertProjection::new(xi_max)));
            }
            be_cache.iter().find(|(x, _)| *x == xi_max).map(|(_, p)| p)
        }
        Profile::Gaussian => None,
    };
    let sigma2 = r_px * r_px / (2.0 * std::f64::consts::LN_2);
    // Shape as a function of the projected radius [px].
    let shape = |b: f64| -> f64 {
        match be {
            Some(p) => p.sigma(b / r_px * p.xi_max()),
            None if b <= extent => (-0.5 * b * b / sigma2).exp(),
            None => 0.0,
        }
    };
    let clamp = |v: f64, n: usize| v.clamp(0.0, n as f64 - 1.0) as usize;
    let x0 = clamp((core.x - extent - 1.0).floor(), spec.nx);
    let x1 = clamp((core.x + extent + 1.0).ceil(), spec.nx);
    let y0 = clamp((core.y - extent - 1.0).floor(), spec.ny);
    let y1 = clamp((core.y + extent + 1.0).ceil(), spec.ny);
    let (w, h) = (x1 - x0 + 1, y1 - y0 + 1);
    // Supersampling so that small cores keep their shape (the mass is exact in any case).
    let sub: usize = if r_px < 2.0 {
        7
    } else if r_px < 8.0 {
        3
    } else {
        1
    };
    let mut values = try_filled(w * h, 0.0)?;
    for j in 0..h {
        for i in 0..w {
            let mut s = 0.0;
            for sj in 0..sub {
                for si in 0..sub {
                    let dx = (x0 + i) as f64 + (si as f64 + 0.5) / sub as f64 - 0.5 - core.x;
                    let dy = (y0 + j) as f64 + (sj as f64 + 0.5) / sub as f64 - 0.5 - core.y;
                    s += shape(dx.hypot(dy));
                }
            }
            values[j * w + i] = s;
        }
    }
    let total: f64 = values.iter().sum();
    if total <= 0.0 {
        // A core smaller than the sampling: a point, shared among the four pixels around it
        // with bilinear weights, which keep its position to a fraction of a pixel (the
        // weighted centroid of the four is the core's position away from the map's edges; at
        // an edge the outer weights go to the edge pixel, keeping the mass).
        let (fx, fy) = (core.x.floor(), core.y.floor());
        let (tx, ty) = (core.x - fx, core.y - fy);
        for (dj, wy) in [(0.0, 1.0 - ty), (1.0, ty)] {
            for (di, wx) in [(0.0, 1.0 - tx), (1.0, tx)] {
                let i = clamp(fx + di, spec.nx).clamp(x0, x1) - x0;
                let j = clamp(fy + dj, spec.ny).clamp(y0, y1) - y0;
                values[j * w + i] += wx * wy;
            }
        }
    }
    let total: f64 = values.iter().sum();
    // Number of H2 molecules the core holds, spread over the grid.
    let molecules = core.mass_msun * M_SUN / (spec.mu_h2 * M_H);
    let scale = molecules / (pix_m * pix_m) / total;
    for v in &mut values {
        *v *= scale;
    }
    Ok(Stamp {
        x0,
        y0,
        w,
        h,
        values,
    })
}

/// The sampled Gaussian beam in 1-D, normalised to unit sum: taps for offsets -k..=k [px].
fn beam_taps(sigma_px: f64) -> Vec<f64> {
    let k = (BEAM_HALF_WIDTH_SIGMA * sigma_px).ceil().max(1.0) as i64;
    let taps: Vec<f64> = (-k..=k)
        .map(|d| (-0.5 * (d as f64 / sigma_px).powi(2)).exp())
        .collect();
    let s: f64 = taps.iter().sum();
    taps.into_iter().map(|t| t / s).collect()
}

/// Discrete Fourier transform of the periodically wrapped, symmetric 1-D kernel (real).
fn taps_transfer(taps: &[f64], n: usize) -> Vec<f64> {
    let k = (taps.len() / 2) as i64;
    (0..n)
        .map(|f| {
            taps.iter()
                .enumerate()
                .map(|(i, t)| {
                    let d = i as i64 - k;
                    let phase =
                        2.0 * std::f64::consts::PI * ((f as i64 * d).rem_euclid(n as i64)) as f64
                            / n as f64;
                    t * phase.cos()
                })
                .sum()
        })
        .collect()
}

/// FFT plans and buffers for periodic filtering of an ny x nx real field.
struct Fourier {
    nx: usize,
    ny: usize,
    fwd_x: Arc<dyn Fft<f64>>,
    inv_x: Arc<dyn Fft<f64>>,
    fwd_y: Arc<dyn Fft<f64>>,
    inv_y: Arc<dyn Fft<f64>>,
}

impl Fourier {
    fn new(nx: usize, ny: usize) -> Self {
        let mut p = FftPlanner::new();
        Fourier {
            nx,
            ny,
            fwd_x: p.plan_fft_forward(nx),
            inv_x: p.plan_fft_inverse(nx),
            fwd_y: p.plan_fft_forward(ny),
            inv_y: p.plan_fft_inverse(ny),
        }
    }

    fn rows(fft: &Arc<dyn Fft<f64>>, buf: &mut [Complex<f64>], len: usize) {
        let scratch_len = fft.get_inplace_scratch_len();
        buf.par_chunks_mut(len).for_each_init(
            || vec![Complex::new(0.0, 0.0); scratch_len],
            |scratch, row| fft.process_with_scratch(row, scratch),
        );
    }

    /// out[c * rows + r] = inp[r * cols + c]
    fn transpose(inp: &[Complex<f64>], out: &mut [Complex<f64>], rows: usize, cols: usize) {
        out.par_chunks_mut(rows).enumerate().for_each(|(c, col)| {
            for (r, o) in col.iter_mut().enumerate() {
                *o = inp[r * cols + c];
            }
        });
    }

    /// Multiplies the 2-D DFT of the real field `field` (row-major, ny x nx) by
    /// `filter(fx_index, fy_index)` and returns the real part of the result.
    fn filter(
        &self,
        field: &mut [f64],
        filter: impl Fn(usize, usize) -> f64 + Sync,
    ) -> Result<(), NoMemory> {
        let (nx, ny) = (self.nx, self.ny);
        let mut a: Vec<Complex<f64>> = Vec::new();
        a.try_reserve_exact(field.len()).map_err(|_| NoMemory)?;
        a.par_extend(field.par_iter().map(|&v| Complex::new(v, 0.0)));
        let mut b = try_filled(nx * ny, Complex::new(0.0, 0.0))?;
        Self::rows(&self.fwd_x, &mut a, nx);
        Self::transpose(&a, &mut b, ny, nx);
        Self::rows(&self.fwd_y, &mut b, ny);
        b.par_chunks_mut(ny).enumerate().for_each(|(fx, col)| {
            for (fy, v) in col.iter_mut().enumerate() {
                *v *= filter(fx, fy);
            }
        });
        Self::rows(&self.inv_y, &mut b, ny);
        Self::transpose(&b, &mut a, nx, ny);
        Self::rows(&self.inv_x, &mut a, nx);
        let norm = 1.0 / (nx * ny) as f64;
        field
            .par_iter_mut()
            .zip(a.par_iter())
            .for_each(|(f, c)| *f = c.re * norm);
        Ok(())
    }
}

/// Signed frequency [cycles per pixel] of DFT index `i` of length `n`.
fn freq(i: usize, n: usize) -> f64 {
    if i <= n / 2 {
        i as f64 / n as f64
    } else {
        (i as f64 - n as f64) / n as f64
    }
}

/// Sum of row sums, in a fixed order whatever the thread count.
fn ordered_sum(v: &[f64], nx: usize, f: impl Fn(f64) -> f64 + Sync) -> f64 {
    let rows: Vec<f64> = v
        .par_chunks(nx)
        .map(|r| r.iter().map(|&x| f(x)).sum())
        .collect();
    rows.iter().sum()
}

/// The Gaussian random field with P(k) ~ k^-index, zero mean, unit variance.
fn gaussian_field(spec: &SynthSpec, index: f64, fourier: &Fourier) -> Result<Vec<f64>, NoMemory> {
    let (nx, ny) = (spec.nx, spec.ny);
    let mut g = try_filled(nx * ny, 0.0)?;
    g.par_chunks_mut(nx).enumerate().for_each(|(row, out)| {
        let mut r = rng(spec.seed, STREAM_BACKGROUND | row as u64);
        for v in out {
            *v = StandardNormal.sample(&mut r);
        }
    });
    fourier.filter(&mut g, |fx, fy| {
        if fx == 0 && fy == 0 {
            0.0
        } else {
            let k2 = freq(fx, nx).powi(2) + freq(fy, ny).powi(2);
            k2.powf(-index / 4.0)
        }
    })?;
    let n = (nx * ny) as f64;
    let mean = ordered_sum(&g, nx, |x| x) / n;
    let var = ordered_sum(&g, nx, |x| (x - mean) * (x - mean)) / n;
    let inv = if var > 0.0 { 1.0 / var.sqrt() } else { 0.0 };
    g.par_iter_mut().for_each(|v| *v = (*v - mean) * inv);
    Ok(g)
}

/// Unit string and factor from H2 column density [m^-2] to output units.
fn output_units(spec: &SynthSpec) -> (&'static str, f64) {
    match spec.output {
        Output::ColumnDensity => ("cm-2", 1e-4),
        Output::DustEmission {
            wavelength_um,
            temperature_k,
            unit,
            opacity,
        } => {
            let nu = C / (wavelength_um * 1e-6);
            let si = spec.mu_h2 * M_H * opacity.kappa_si(nu) * planck_nu(nu, temperature_k);
            match unit {
                EmissionUnit::MJyPerSr => ("MJy/sr", si / JY / 1e6),
                EmissionUnit::JyPerBeam => {
                    let fwhm = spec.beam_fwhm_arcsec * ARCSEC;
                    let omega = std::f64::consts::PI * fwhm * fwhm / (4.0 * std::f64::consts::LN_2);
                    ("Jy/beam", si / JY * omega)
                }
            }
        }
    }
}

/// Adds a core's stamp, convolved linearly (directly, term by term, the sky beyond the map's
/// edges empty for it) with the separable beam `taps` (none: as it is), to the `nx`-wide
/// `layer` over the map's pixels, and returns its peak there. What the beam carries beyond the
/// edges is dropped, so a core near an edge is not seen at the opposite edge.
fn add_convolved(
    stamp: &Stamp,
    taps: Option<&[f64]>,
    layer: &mut [f64],
    nx: usize,
) -> Result<f64, NoMemory> {
    let ny = layer.len() / nx;
    let (out, k) = match taps {
        None => (None, 0),
        Some(t) => {
            let k = t.len() / 2;
            let w = stamp.w + 2 * k;
            // Horizontal pass into a padded buffer, then vertical.
            let mut tmp = try_filled(w * stamp.h, 0.0)?;
            for j in 0..stamp.h {
                for i in 0..stamp.w {
                    let v = stamp.values[j * stamp.w + i];
                    if v != 0.0 {
                        for (d, tv) in t.iter().enumerate() {
                            tmp[j * w + i + d] += v * tv;
                        }
                    }
                }
            }
            let mut out = try_filled(w * (stamp.h + 2 * k), 0.0)?;
            for j in 0..stamp.h {
                for i in 0..w {
                    let v = tmp[j * w + i];
                    if v != 0.0 {
                        for (d, tv) in t.iter().enumerate() {
                            out[(j + d) * w + i] += v * tv;
                        }
                    }
                }
            }
            (Some(out), k)
        }
    };
    let values = out.as_deref().unwrap_or(&stamp.values);
    let (w, h) = (stamp.w + 2 * k, stamp.h + 2 * k);
    // Output pixel (i, j) is map pixel (x0 + i - k, y0 + j - k); only those on the map count.
    let on_map = |i: usize, n: usize, o: usize| i + o >= k && i + o - k < n;
    let mut peak = 0.0f64;
    for j in (0..h).filter(|&j| on_map(j, ny, stamp.y0)) {
        let row = (stamp.y0 + j - k) * nx;
        for i in (0..w).filter(|&i| on_map(i, nx, stamp.x0)) {
            let v = values[j * w + i];
            layer[row + stamp.x0 + i - k] += v;
            peak = peak.max(v);
        }
    }
    Ok(peak)
}

/// Generates the map a spec describes.
///
/// Refuses, with a sentence naming the option and the fix: a spec [`check`] refuses; a map
/// whose memory cannot be had; a background that exceeds or underflows the map's 32-bit floats;
/// a map holding values that are not finite (too massive cores, too much noise).
pub fn generate(spec: &SynthSpec) -> Result<SynthMap, SynthError> {
    generate_with_progress(spec, &|_, _| {})
}

/// [`generate`], calling `progress` with the stage about to run ("background", "cores",
/// "beam", "noise") and the fraction of the stages done (0 to 1), from the calling thread. The
/// map does not depend on it.
pub fn generate_with_progress(
    spec: &SynthSpec,
    progress: &dyn Fn(&str, f64),
) -> Result<SynthMap, SynthError> {
    check(spec)?;
    let oom = |_: NoMemory| out_of_memory(spec);
    let (nx, ny) = (spec.nx, spec.ny);
    let fourier = Fourier::new(nx, ny);
    let (unit, factor) = output_units(spec);

    let sigma_px =
        spec.beam_fwhm_arcsec / spec.pixel_arcsec / (8.0 * std::f64::consts::LN_2).sqrt();
    let taps = (spec.beam_fwhm_arcsec > 0.0).then(|| beam_taps(sigma_px));

    // 1. Background [m^-2], convolved with the beam periodically (it is periodic).
    progress("background", 0.0);
    let background = match &spec.background {
        Some(b) => {
            let g = gaussian_field(spec, b.spectral_index, &fourier).map_err(oom)?;
            let (mean, s) = (b.mean_column_cm2 * 1e4, b.sigma_ln);
            let mut col = Vec::new();
            col.try_reserve_exact(g.len()).map_err(|_| oom(NoMemory))?;
            col.par_extend(g.par_iter().map(|v| mean * (s * v - 0.5 * s * s).exp()));
            drop(g);
            // In output units and single precision, as the map will hold it.
            let (too_big, too_small) = col
                .par_iter()
                .map(|&v| {
                    let o = (v * factor) as f32;
                    (!o.is_finite(), o.is_nan() || o <= 0.0)
                })
                .reduce(|| (false, false), |a, b| (a.0 || b.0, a.1 || b.1));
            if too_big {
                return Err(SynthError(format!(
                    "the background of mean {:e} cm-2 exceeds the largest value the map's 32-bit floats hold ({:e} {unit}): lower --background (background.mean_column_cm2) or --background-width",
                    b.mean_column_cm2,
                    f32::MAX
                )));
            }
            if too_small {
                return Err(SynthError(format!(
                    "the background of mean {:e} cm-2 underflows to zero in some pixels of the map's 32-bit floats: raise --background (background.mean_column_cm2) or lower --background-width",
                    b.mean_column_cm2
                )));
            }
            if let Some(t) = &taps {
                let (tx, ty) = (taps_transfer(t, nx), taps_transfer(t, ny));
                fourier
                    .filter(&mut col, |fx, fy| tx[fx] * ty[fy])
                    .map_err(oom)?;
            }
            Some(col)
        }
        None => None,
    };
    drop(fourier);

    // 2. Cores [m^-2], on a layer of their own.
    progress("cores", 0.25);
    let cores = all_cores(spec);
    let mut layer = if cores.is_empty() {
        None
    } else {
        Some(try_filled(nx * ny, 0.0).map_err(oom)?)
    };
    let mut be_cache = Vec::new();
    let mut truth = Vec::new();
    for (i, core) in cores.iter().enumerate() {
        let stamp = render_core(core, spec, &mut be_cache).map_err(oom)?;
        let peak = match layer.as_mut() {
            Some(layer) => add_convolved(&stamp, taps.as_deref(), layer, nx).map_err(oom)?,
            None => 0.0,
        };
        let (lon, lat) = pixel_to_world(spec, core.x, core.y);
        truth.push(TruthCore {
            id: i + 1,
            x: core.x,
            y: core.y,
            lon_deg: lon,
            lat_deg: lat,
            mass_msun: core.mass_msun,
            radius_pc: core.radius_pc,
            profile: core.profile.name().to_string(),
            peak: peak * factor,
            peak_unit: unit.to_string(),
            peak_column_cm2: stamp.values.iter().cloned().fold(0.0, f64::max) * 1e-4,
        });
    }
    drop(cores);

    // 3. The cores, convolved as they were added, on the background.
    progress("beam", 0.5);
    let col = match (background, layer) {
        (Some(mut b), Some(l)) => {
            b.par_iter_mut()
                .zip(l.par_iter())
                .for_each(|(b, l)| *b += l);
            b
        }
        (Some(b), None) => b,
        (None, Some(l)) => l,
        (None, None) => try_filled(nx * ny, 0.0).map_err(oom)?,
    };

    // 4-5. Units and noise; notes whether the signal or the noise left the f32 range.
    progress("noise", 0.75);
    let mut data = try_filled(nx * ny, 0.0f32).map_err(oom)?;
    let (bad_signal, bad_total) = data
        .par_chunks_mut(nx)
        .zip(col.par_chunks(nx))
        .enumerate()
        .map(|(row, (out, inp))| {
            let mut r = rng(spec.seed, STREAM_NOISE | row as u64);
            let (mut bad_signal, mut bad_total) = (false, false);
            for (o, &v) in out.iter_mut().zip(inp) {
                let mut x = v * factor;
                bad_signal |= !(x as f32).is_finite();
                if spec.noise_rms > 0.0 {
                    let n: f64 = StandardNormal.sample(&mut r);
                    x += spec.noise_rms * n;
                }
                *o = x as f32;
                bad_total |= !o.is_finite();
            }
            (bad_signal, bad_total)
        })
        .reduce(|| (false, false), |a, b| (a.0 || b.0, a.1 || b.1));
    drop(col);
    if bad_signal {
        return Err(SynthError(format!(
            "the cores make pixel values beyond what the map's 32-bit floats hold ({:e} {unit}): lower --core-mass (the cores' mass_msun in a spec file) or raise --core-radius",
            f32::MAX
        )));
    }
    if bad_total {
        return Err(SynthError(format!(
            "--noise (noise_rms) {:e} makes pixel values beyond what the map's 32-bit floats hold ({:e} {unit}): give a smaller --noise",
            spec.noise_rms,
            f32::MAX
        )));
    }
    let data = Array2::from_shape_vec((ny, nx), data).expect("shape matches");
    Ok(SynthMap {
        data,
        header: make_header(spec, unit),
        truth,
    })
}

fn make_header(spec: &SynthSpec, unit: &str) -> Header {
    let mut h = Header::new();
    let f = Value::Float;
    let s = |t: &str| Value::Str(t.to_string());
    h.set("NAXIS", Value::Int(2), "");
    h.set("NAXIS1", Value::Int(spec.nx as i64), "");
    h.set("NAXIS2", Value::Int(spec.ny as i64), "");
    h.set("WCSAXES", Value::Int(2), "");
    let (c1, c2) = match spec.frame {
        Frame::Galactic => ("GLON-TAN", "GLAT-TAN"),
        _ => ("RA---TAN", "DEC--TAN"),
    };
    let (crpix1, crpix2) = crpix(spec);
    let cdelt = spec.pixel_arcsec / 3600.0;
    h.set("CTYPE1", s(c1), "gnomonic projection");
    h.set("CTYPE2", s(c2), "gnomonic projection");
    h.set("CRPIX1", f(crpix1), "map centre (1-based)");
    h.set("CRPIX2", f(crpix2), "map centre (1-based)");
    h.set(
        "CRVAL1",
        f(spec.centre_lon_deg.rem_euclid(360.0)),
        "[deg] invented position",
    );
    h.set("CRVAL2", f(spec.centre_lat_deg), "[deg] invented position");
    h.set("CDELT1", f(-cdelt), "[deg]");
    h.set("CDELT2", f(cdelt), "[deg]");
    h.set("CUNIT1", s("deg"), "");
    h.set("CUNIT2", s("deg"), "");
    h.set("LONPOLE", f(180.0), "[deg]");
    match spec.frame {
        Frame::Icrs => h.set("RADESYS", s("ICRS"), ""),
        Frame::Fk5 => {
            h.set("RADESYS", s("FK5"), "");
            h.set("EQUINOX", f(2000.0), "");
        }
        Frame::Galactic => {}
    }
    h.set("BUNIT", s(unit), "");
    if spec.beam_fwhm_arcsec > 0.0 {
        let b = spec.beam_fwhm_arcsec / 3600.0;
        h.set("BMAJ", f(b), "[deg] beam FWHM");
        h.set("BMIN", f(b), "[deg] beam FWHM");
        h.set("BPA", f(0.0), "[deg]");
    }
    if let Output::DustEmission {
        wavelength_um,
        temperature_k,
        ..
    } = spec.output
    {
        h.set("WAVELEN", f(wavelength_um * 1e-6), "[m] wavelength");
        h.set("RESTFRQ", f(C / (wavelength_um * 1e-6)), "[Hz] frequency");
        h.set("TDUST", f(temperature_k), "[K] dust temperature");
    }
    h.set("DISTANCE", f(spec.distance_pc), "[pc]");
    h.set(
        "ORIGIN",
        s(&format!("cairn {}", env!("CARGO_PKG_VERSION"))),
        "synthetic map",
    );
    let mut cards = h.cards().to_vec();
    let json = serde_json::to_string(spec).unwrap_or_default();
    cards.push(Card {
        key: "COMMENT".into(),
        value: None,
        comment: format!(
            "synthetic map made by cairn {}; spec (JSON):",
            env!("CARGO_PKG_VERSION")
        ),
    });
    let chars: Vec<char> = json.chars().collect();
    for chunk in chars.chunks(72) {
        cards.push(Card {
            key: "COMMENT".into(),
            value: None,
            comment: chunk.iter().collect::<String>(),
        });
    }
    Header::from_cards(cards)
}

/// Writes the truth table as CSV: a commented line naming the units, then a column header.
pub fn write_truth_csv(path: &Path, cores: &[TruthCore]) -> std::io::Result<()> {
    write_truth_csv_with_notes(path, cores, &[])
}

/// [`write_truth_csv`] with more commented lines (`# NOTE`) after the line naming the units.
pub fn write_truth_csv_with_notes(
    path: &Path,
    cores: &[TruthCore],
    notes: &[String],
) -> std::io::Result<()> {
    let mut out = std::io::BufWriter::new(crate::output::create_file(path)?);
    let unit = cores
        .first()
        .map(|c| c.peak_unit.as_str())
        .unwrap_or("map units");
    writeln!(
        out,
        "# x, y: zero-based pixel (centre of first pixel = 0,0); lon_deg, lat_deg: deg; \
         mass_msun: M_sun; radius_pc: pc (half width at half maximum of Gaussian cores, outer \
         radius of Bonnor-Ebert cores; not a catalogue's effective radius); \
         peak: {unit} (beam-convolved, no background); \
         peak_column_cm2: cm-2 (before convolution)"
    )?;
    for n in notes {
        writeln!(out, "# {n}")?;
    }
    writeln!(
        out,
        "id,x,y,lon_deg,lat_deg,mass_msun,radius_pc,profile,peak,peak_column_cm2"
    )?;
    for c in cores {
        writeln!(
            out,
            "{},{:?},{:?},{:?},{:?},{:?},{:?},{},{:?},{:?}",
            c.id,
            c.x,
            c.y,
            c.lon_deg,
            c.lat_deg,
            c.mass_msun,
            c.radius_pc,
            c.profile,
            c.peak,
            c.peak_column_cm2
        )?;
    }
    out.flush()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn background_field_has_zero_mean_and_unit_variance() {
        let spec = SynthSpec {
            nx: 64,
            ny: 48,
            ..SynthSpec::default()
        };
        let g = gaussian_field(&spec, 3.0, &Fourier::new(64, 48))
            .ok()
            .unwrap();
        let n = g.len() as f64;
        let mean = g.iter().sum::<f64>() / n;
        let var = g.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
        assert!(
            mean.abs() < 1e-12 && (var - 1.0).abs() < 1e-12,
            "mean {mean}, var {var}"
        );
    }

    #[test]
    fn beam_transfer_conserves_the_total_and_filters_round_trip() {
        let taps = beam_taps(1.7);
        assert!((taps.iter().sum::<f64>() - 1.0).abs() < 1e-15);
        let h = taps_transfer(&taps, 40);
        assert!((h[0] - 1.0).abs() < 1e-15, "DC gain {}", h[0]);
        // The identity filter returns the field.
        let mut f: Vec<f64> = (0..40 * 30).map(|i| ((i * 7919) % 113) as f64).collect();
        let orig = f.clone();
        assert!(Fourier::new(40, 30).filter(&mut f, |_, _| 1.0).is_ok());
        assert!(f.iter().zip(&orig).all(|(a, b)| (a - b).abs() < 1e-10));
    }

    /// A spec of one core on an empty sky, with a beam of 3 pixels FWHM.
    fn one_core(x: f64, y: f64) -> SynthSpec {
        SynthSpec {
            nx: 96,
            ny: 80,
            beam_fwhm_arcsec: 18.0,
            background: None,
            cores: vec![CoreSpec {
                x,
                y,
                mass_msun: 2.0,
                radius_pc: 0.02,
                profile: Profile::Gaussian,
            }],
            ..SynthSpec::default()
        }
    }

    /// The core of `spec` convolved periodically, as synth convolved its cores before they
    /// were convolved linearly: the stamp on the map, filtered by FFT with the wrapped beam.
    fn periodic_core(spec: &SynthSpec) -> Vec<f64> {
        let (nx, ny) = (spec.nx, spec.ny);
        let stamp = render_core(&spec.cores[0], spec, &mut Vec::new())
            .ok()
            .unwrap();
        let mut col = vec![0.0; nx * ny];
        for j in 0..stamp.h {
            for i in 0..stamp.w {
                col[(stamp.y0 + j) * nx + stamp.x0 + i] = stamp.values[j * stamp.w + i];
            }
        }
        let sigma = spec.beam_fwhm_arcsec / spec.pixel_arcsec / (8.0 * 2f64.ln()).sqrt();
        let taps = beam_taps(sigma);
        let (tx, ty) = (taps_transfer(&taps, nx), taps_transfer(&taps, ny));
        assert!(
            Fourier::new(nx, ny)
                .filter(&mut col, |fx, fy| tx[fx] * ty[fy])
                .is_ok()
        );
        col
    }

    #[test]
    fn a_core_far_from_the_edges_is_convolved_as_the_periodic_convolution_did() {
        // Periodic and linear convolutions agree when nothing wraps (the core's stamp, 6 HWHM
        // = 17 px, and the kernel, 7 sigma = 9 px, lie well inside the map).
        let spec = one_core(47.3, 40.6);
        let map = generate(&spec).unwrap();
        let old = periodic_core(&spec);
        let peak = old.iter().cloned().fold(0.0, f64::max) * 1e-4;
        for (i, (&m, &o)) in map.data.iter().zip(&old).enumerate() {
            // The map holds cm-2 in f32: half an ulp (2^-24 relative) of the value, plus the
            // periodic FFT's round-off (1e-12 of the peak, generous).
            let o = o * 1e-4;
            assert!(
                (m as f64 - o).abs() <= o.abs() * 2f64.powi(-24) + 1e-12 * peak,
                "pixel {i}: {m} vs periodic {o}"
            );
        }
        // Near an edge the two differ: the periodic one wraps the core round to the far edge.
        let near = one_core(2.0, 40.0);
        let map = generate(&near).unwrap();
        let old = periodic_core(&near);
        let far_edge = |row: usize| row * near.nx + near.nx - 1;
        assert!(
            old[far_edge(40)] > 1e-3 * peak * 1e4,
            "the periodic one wraps"
        );
        assert_eq!(map.data[[40, near.nx - 1]], 0.0, "the linear one does not");
    }

    #[test]
    fn default_margin_is_the_widest_core_reach() {
        // Hand calculation for the demo maps' population: 0.07 pc at 410 pc is
        // 0.07 / 410 * 206264.8 / 6 = 5.870 px (HWHM), sigma 5.870 / 1.1774 = 4.985 px; the
        // beam 18.2" / 6" / 2.3548 = 1.288 px; reach 4 (4.985^2 + 1.288^2)^(1/2) = 20.59,
        // rounded up to 21.
        let spec = SynthSpec {
            nx: 512,
            ny: 384,
            distance_pc: 410.0,
            beam_fwhm_arcsec: 18.2,
            ..SynthSpec::default()
        };
        assert_eq!(
            default_margin_px(&spec, 0.07, Profile::Gaussian),
            (21.0, 21.0)
        );
        // A Bonnor-Ebert core: its outer radius plus four beam sigmas, 5.870 + 5.153 = 11.02,
        // rounded up to 12.
        assert_eq!(
            default_margin_px(&spec, 0.07, Profile::critical_bonnor_ebert()).1,
            12.0
        );
        // Small cores keep the 10 pixels synth always kept.
        assert_eq!(default_margin_px(&spec, 0.001, Profile::Gaussian).0, 10.0);
        // A map of 40 pixels leaves room for at most 19 (2 x 19 < 39).
        let small = SynthSpec {
            nx: 40,
            ny: 60,
            ..spec
        };
        assert_eq!(
            default_margin_px(&small, 0.07, Profile::Gaussian),
            (19.0, 21.0)
        );
    }

    #[test]
    fn rendered_core_holds_its_mass_even_when_smaller_than_a_pixel() {
        let spec = SynthSpec::default();
        let pix_m = spec.distance_pc * PC * spec.pixel_arcsec * ARCSEC;
        for (radius, profile) in [
            (0.05, Profile::Gaussian),
            (1e-5, Profile::Gaussian),
            (0.04, Profile::critical_bonnor_ebert()),
        ] {
            let core = CoreSpec {
                x: 100.2,
                y: 80.7,
                mass_msun: 2.0,
                radius_pc: radius,
                profile,
            };
            let stamp = render_core(&core, &spec, &mut Vec::new()).ok().unwrap();
            let total = stamp.values.iter().sum::<f64>();
            let mass = total * pix_m * pix_m * MU_H2 * M_H / M_SUN;
            assert!((mass - 2.0).abs() < 1e-13, "radius {radius}: {mass}");
            // The weighted centroid is the core's position (by symmetry of the profile about
            // it; a hand calculation: the stamp's pixels sit at integer coordinates).
            let (mut cx, mut cy) = (0.0, 0.0);
            for j in 0..stamp.h {
                for i in 0..stamp.w {
                    let v = stamp.values[j * stamp.w + i];
                    cx += v * (stamp.x0 + i) as f64;
                    cy += v * (stamp.y0 + j) as f64;
                }
            }
            let (cx, cy) = (cx / total, cy / total);
            let tol = if radius < 1e-3 { 1e-12 } else { 2e-3 };
            assert!(
                (cx - core.x).abs() < tol && (cy - core.y).abs() < tol,
                "radius {radius}: centroid ({cx}, {cy})"
            );
        }
    }

    #[test]
    fn output_names_must_be_plain_file_names() {
        for good in ["synth", "velloran-850um", "a.b", "map_1"] {
            assert!(check_name(good).is_ok(), "{good}");
        }
        for bad in [
            "",
            "a/b",
            "/abs",
            "../escape",
            ".hidden",
            "a\\b",
            "tab\there",
        ] {
            let e = check_name(bad).unwrap_err();
            assert!(
                e.0.starts_with("--name") && e.0.contains("plain file name"),
                "{e}"
            );
        }
    }

    #[test]
    fn sizes_and_core_counts_are_checked_without_wrapping() {
        for (nx, ny) in [
            (100_000, 100_000),
            (1 << 32, 1 << 32),
            (usize::MAX, usize::MAX),
        ] {
            let e = check(&SynthSpec {
                nx,
                ny,
                ..SynthSpec::default()
            })
            .unwrap_err();
            assert!(e.0.contains("--size") && e.0.contains("2^31 - 1"), "{e}");
        }
        let spec = |count| SynthSpec {
            population: Some(CorePopulation {
                count,
                mass_min_msun: 1.0,
                mass_max_msun: 2.0,
                mass_index: 2.35,
                radius_min_pc: 0.02,
                radius_max_pc: 0.05,
                profile: Profile::Gaussian,
                margin_px: 10.0,
            }),
            ..SynthSpec::default()
        };
        assert!(check(&spec(256 * 256 / 4)).is_ok());
        assert!(
            check(&spec(256 * 256 / 4 + 1))
                .unwrap_err()
                .0
                .contains("--cores")
        );
        assert!(check(&spec(usize::MAX)).unwrap_err().0.contains("--cores"));
    }

    #[test]
    fn map_centre_maps_to_crval() {
        let spec = SynthSpec {
            nx: 11,
            ny: 9,
            ..SynthSpec::default()
        };
        let (lon, lat) = pixel_to_world(&spec, 5.0, 4.0);
        assert_eq!((lon, lat), (spec.centre_lon_deg, spec.centre_lat_deg));
        // One pixel east (x - 1) lies at larger longitude.
        assert!(pixel_to_world(&spec, 4.0, 4.0).0 > lon);
    }
}
