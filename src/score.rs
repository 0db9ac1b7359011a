//! Physical scoring: every pixel as an H2 column density, and every structure's mass, size,
//! density and gravitational state.
//!
//! Owns the physical context of a run (distance, dust temperature, opacity law, mean
//! molecular weights, extinction-to-column factors, non-thermal velocity dispersion), the
//! per-pixel conversion to N(H2), the per-structure sums it needs, and the derived quantities.
//!
//! Conversions and laws (all with their units in the catalogue header):
//! * Column density maps are used as they are. Extinction maps: N(H2) = 9.4e20 cm^-2 mag^-1
//!   A_V (Bohlin, Savage & Drake 1978, ApJ 224, 132, for R_V = 3.1; their N(H) = 1.87e21 A_V
//!   counted as N(HI) + 2 N(H2), so N(H2) = N(H)/2 for fully molecular gas, rounded as is
//!   common practice), and A_V = A_K / 0.112 (Rieke & Lebofsky 1985, ApJ 288, 618).
//! * Dust emission, optically thin: I_nu = N(H2) mu_H2 m_H kappa_nu B_nu(T_d) (Hildebrand
//!   1983), with kappa_nu = 0.1 cm^2 g^-1 (nu / 1 THz)^2 per gram of gas (Beckwith et al.
//!   1990; gas-to-dust ratio 100, Hildebrand 1983). Jy/beam is divided by the Gaussian beam's
//!   solid angle pi/(4 ln 2) theta_maj theta_min, Jy/pixel by the pixel's solid angle at that
//!   pixel, so all three emission units give the same column density.
//! * Mass M = mu_H2 m_H d^2 Omega_pix sum N(H2) over the footprint, with mu_H2 = 2.8
//!   (Kauffmann et al. 2008, A&A 487, 993) and Omega_pix at the structure's centroid. The
//!   *excess mass* subtracts, pixel by pixel, the column density of the structure's merge
//!   level (the floor for top-level structures): the structure above its surroundings.
//! * Sizes: R_eff = d sqrt(A/pi); deconvolved R = sqrt(R_eff^2 - (theta_beam/2)^2 d^2) with
//!   theta_beam the geometric mean FWHM (common practice). A structure is flagged unresolved
//!   when its deconvolved radius is less than the beam's half width, theta_beam d / 2 (its
//!   deconvolved diameter smaller than the beam; R_eff < theta_beam d / sqrt(2), a footprint
//!   under 1.39 beam areas), and its deconvolved radius is then left empty: below that the
//!   difference of nearly equal squares says little (cairn's convention; the bound varies
//!   between studies). With the default least leaf area of one beam, a bound of R_eff <=
//!   theta_beam d / 2 (0.69 beam areas) could never be met.
//! * Moment radius R_mom = 1.91 d (sigma_maj sigma_min)^(1/2) of the beam-deconvolved axes
//!   ([`crate::measure::deconvolve`]): the factor 1.91 of Solomon et al. 1987 (ApJ 319, 730)
//!   between a cloud's rms size and its radius, as Rosolowsky & Leroy 2006 (PASP 118, 590)
//!   apply it to the deconvolved moments; small angles (d theta for d tan theta). Empty where
//!   the deconvolved axes are. A structure clipped at its merge level or the floor has
//!   smaller moments than its whole profile, so R_mom underestimates its full extent (the
//!   clipping bias those papers discuss); it is given beside R_eff and the physics below
//!   keeps using R_eff.
//! * Mean density n(H2) = M / (4/3 pi R_eff^3 mu_H2 m_H): a uniform sphere of the effective
//!   radius (an assumption; real cores are centrally condensed).
//! * Sound speed c_s = (k T / (mu_p m_H))^(1/2) with mu_p = 2.33 (metal-free H2 and He,
//!   common practice; [`crate::physics::MU_P`]).
//! * Jeans mass and length at the mean density (Jeans 1902); critical Bonnor-Ebert mass
//!   M_BE = C R_eff c_s^2 / G with C = xi_crit psi'(xi_crit) = 2.43 (Ebert 1955; Bonnor 1956),
//!   alpha_BE = M_BE / M; virial parameter alpha_vir = 5 sigma^2 R_eff / (G M) (Bertoldi &
//!   McKee 1992, ApJ 395, 140) with sigma^2 = c_s^2 + sigma_nt^2; free-fall time
//!   t_ff = (3 pi / (32 G rho))^(1/2).
//! * State (indicative only): when a velocity dispersion is known, `bound` if alpha_vir <= 2,
//!   `marginal` if 2 < alpha_vir <= 4, `unbound` above; otherwise the same words for
//!   alpha_BE <= 1, 1 < alpha_BE <= 2, above 2. Computed with the excess mass for every
//!   structure. `unknown` without distance and temperature.
//! * Noise: the map noise sigma is carried to the peak (sigma times the conversion) and to the
//!   mass as sigma sqrt(N_pix N_beam) (noise correlated over a beam of N_beam pixels; 1
//!   without a beam).
//!
//! Systematics dominate: opacity (a factor of about 2), temperature and distance (mass goes
//! as d^2) each move masses by tens of per cent or more; the state is indicative.

use std::sync::OnceLock;

use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;
use serde::Serialize;

use crate::hierarchy::Hierarchy;
use crate::map::Map;
use crate::measure::Measurement;
use crate::physics::constants::{G, M_H, M_SUN, PC};
use crate::physics::{self, DustOpacity};
use crate::units::{self, ExtinctionBand, PixelUnit};

/// H2 column density per magnitude of A_V: 9.4e20 cm^-2 (Bohlin, Savage & Drake 1978).
pub const NH2_PER_AV_CM2: f64 = 9.4e20;
/// A_V / A_K = 1 / 0.112 (Rieke & Lebofsky 1985).
pub const AV_PER_AK: f64 = 1.0 / 0.112;
/// The factor between a moment radius and the geometric mean of the major and minor standard
/// deviations: 1.91 (Solomon et al. 1987, ApJ 319, 730; as used by Rosolowsky & Leroy 2006,
/// PASP 118, 590).
pub const MOMENT_RADIUS_FACTOR: f64 = 1.91;
/// Seconds per Julian year.
pub const YEAR: f64 = 365.25 * 86400.0;

/// A value given once for the map or pixel by pixel.
#[derive(Debug, Clone)]
pub enum Field {
    /// One value everywhere.
    Uniform(f64),
    /// One value per pixel (same grid as the map); NaN where unknown.
    Map(Array2<f32>),
}

impl Field {
    /// For a field given pixel by pixel, the SHA-256 of its values as used (row by row, each
    /// value's IEEE 754 single-precision bits, little-endian), in hexadecimal: two files that
    /// hold the same values have the same digest whatever their headers or data types.
    pub fn values_sha256(&self) -> Option<String> {
        use sha2::{Digest, Sha256};
        let Field::Map(m) = self else { return None };
        let mut h = Sha256::new();
        let mut buf = Vec::with_capacity(4 * m.ncols());
        for row in m.rows() {
            buf.clear();
            for v in row {
                buf.extend_from_slice(&v.to_bits().to_le_bytes());
            }
            h.update(&buf);
        }
        Some(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
    }

    fn at(&self, y: usize, x: usize) -> f64 {
        match self {
            Field::Uniform(v) => *v,
            Field::Map(m) => m[(y, x)] as f64,
        }
    }

    /// A description for records.
    pub fn describe(&self, unit: &str) -> String {
        match self {
            Field::Uniform(v) => format!("{v} {unit}"),
            Field::Map(_) => "per pixel (map)".into(),
        }
    }
}

/// Gives the pixels of a temperature map that are undefined (NaN) where `map` has data the
/// median of its defined pixels (of a regular sample on very large maps, as for noise maps,
/// [`crate::noise::finite_sample`]), so that one undefined pixel does not leave the structure
/// around it without a column density or mass: the conversion of emission needs a
/// temperature at every pixel. Returns how many pixels were given the median, and the
/// median; `None` when none needed it, and an error sentence when no pixel is defined.
pub fn fill_undefined_temperatures(
    t: &mut Array2<f32>,
    map: ArrayView2<f32>,
) -> Result<Option<(usize, f64)>, String> {
    let needing = t
        .iter()
        .zip(map.iter())
        .filter(|(tv, mv)| !tv.is_finite() && mv.is_finite())
        .count();
    if needing == 0 {
        return Ok(None);
    }
    let mut sample = crate::noise::finite_sample(t.view());
    if sample.is_empty() {
        return Err("has no defined pixel (all are NaN); give a temperature map with values, or --temperature".into());
    }
    let median = crate::noise::median_in_place(&mut sample);
    for (tv, mv) in t.iter_mut().zip(map.iter()) {
        if !tv.is_finite() && mv.is_finite() {
            *tv = median as f32;
        }
    }
    Ok(Some((needing, median)))
}

/// The physical assumptions of a run.
#[derive(Debug, Clone)]
pub struct Context {
    /// Distance in metres (None: angular quantities only).
    pub distance_m: Option<f64>,
    /// Dust temperature in kelvin (None: no emission conversion and no stability).
    pub temperature_k: Option<Field>,
    /// Opacity law per gram of gas.
    pub opacity: DustOpacity,
    /// Mean molecular weight per H2 molecule.
    pub mu_h2: f64,
    /// Mean molecular weight per free particle.
    pub mu_p: f64,
    /// N(H2) per magnitude of A_V, in m^-2.
    pub nh2_per_av_m2: f64,
    /// A_V per magnitude of A_K.
    pub av_per_ak: f64,
    /// Non-thermal velocity dispersion in m/s (None: virial parameter not computed).
    pub sigma_nt: Option<Field>,
    /// Warnings about how these assumptions were made that change what the run measures
    /// (such as the undefined pixels of a temperature map given its median), which a run
    /// records with its other warnings: in the run record and the catalogue's notes.
    pub warnings: Vec<String>,
}

impl Default for Context {
    fn default() -> Self {
        Context {
            distance_m: None,
            temperature_k: None,
            opacity: DustOpacity::default(),
            mu_h2: physics::MU_H2,
            mu_p: physics::MU_P,
            nh2_per_av_m2: NH2_PER_AV_CM2 * 1e4,
            av_per_ak: AV_PER_AK,
            sigma_nt: None,
            warnings: Vec::new(),
        }
    }
}

/// A warning for a distance no molecular cloud cairn measures is likely at, given as
/// `given`: nearer than 10 pc (the nearest clouds lie about 100 pc away) or farther than
/// 100 kpc (beyond our Galaxy and its nearest satellite galaxies, where a parsec typed as a
/// kiloparsec lands); such distances are not refused, as clouds of other galaxies are
/// measured too. The limits are common practice, not from a source.
pub fn distance_warning(distance_m: f64, given: &str) -> Option<String> {
    let pc = distance_m / crate::physics::constants::PC;
    if pc < 10.0 {
        Some(format!(
            "--distance {given} is nearer than any molecular cloud (the nearest lie about 100 pc away); check its unit, such as 140pc or 1.4kpc"
        ))
    } else if pc > 1e5 {
        Some(format!(
            "--distance {given} places the cloud more than 100 kpc away, beyond our Galaxy and its nearest satellite galaxies; if parsecs were meant, give {}pc",
            crate::units::tidy(pc / 1e3)
        ))
    } else {
        None
    }
}

/// The caution that goes with the masses of a map of this unit: which assumptions carry
/// their systematics (common practice: the factor of two of dust-emission masses comes from
/// the opacity's and the temperature's uncertainty, the distance enters squared).
pub fn mass_caution(unit: Option<PixelUnit>) -> &'static str {
    match unit {
        Some(PixelUnit::Extinction { .. }) => {
            "caution: masses carry systematics from the extinction-to-column ratio (tens of per cent) and the distance (squared)"
        }
        Some(u) if u.is_emission() => {
            "caution: column densities and masses carry factor-of-two systematics from dust opacity, temperature and distance"
        }
        _ => {
            "caution: masses carry the column-density map's own systematics (factor of two where it came from dust emission) and the distance's (squared)"
        }
    }
}

/// The largest h nu / k T at which dust emission is converted to column density (see
/// [`conversion_blocker`]).
pub const WIEN_LIMIT: f64 = 100.0;

/// Why a map cannot be converted to column density.
pub fn conversion_blocker(map: &Map, ctx: &Context) -> Option<String> {
    let unit = map.unit?;
    if let PixelUnit::Other = unit {
        return Some(format!(
            "{} has no conversion to column density: masses and the physics need a map of dust emission, column density or extinction (give --unit if the map's unit is wrong)",
            match crate::units::canonical_unit(map.unit, &map.unit_text) {
                u if u.is_empty() => "a map without a unit".to_string(),
                u => format!("the unit '{u}'"),
            }
        ));
    }
    if !unit.is_emission() {
        return None;
    }
    if map.wavelength_m.is_none() {
        return Some("the map's wavelength is unknown: give --wavelength, such as 850um".into());
    }
    if ctx.temperature_k.is_none() {
        return Some("a dust-emission map needs a dust temperature for column densities and masses: give --temperature, such as 15K, or --temperature-map".into());
    }
    if matches!(unit, PixelUnit::FluxPerBeam { .. }) && map.beam.is_none() {
        return Some("a Jy/beam map needs its beam: give --beam".into());
    }
    if matches!(unit, PixelUnit::FluxPerPixel { .. }) && map.wcs.is_none() {
        return Some("a Jy/pixel map needs a celestial WCS to know the pixel's solid angle".into());
    }
    // Far on the Wien side the Planck function falls as exp(-h nu / k T): past h nu / k T of
    // about 672 (at 850 um) it is no longer a normal double and past 709.8 it is zero, and
    // long before that the column densities and their squared uncertainties leave the range
    // of doubles. At h nu / k T = 100 the emission is e^-100 (4e-44) of the Rayleigh-Jeans
    // value: no dust at that temperature emits measurably at that wavelength.
    let lowest = match &ctx.temperature_k {
        Some(Field::Uniform(t)) => *t,
        Some(Field::Map(m)) => m
            .iter()
            .filter(|v| v.is_finite())
            .fold(f64::INFINITY, |a, &v| a.min(v as f64)),
        None => f64::NAN,
    };
    if let Some(w) = map.wavelength_m {
        let x = physics::constants::H * units::C_LIGHT / (w * physics::constants::K_B * lowest);
        if x > WIEN_LIMIT {
            return Some(format!(
                "at {} um and {} K, h nu / k T = {}: dust that cold emits nothing measurable at that wavelength (less than e^-100 of its Rayleigh-Jeans value); check the wavelength and the temperature",
                units::tidy(w * 1e6),
                units::tidy(lowest),
                units::tidy(x.round())
            ));
        }
    }
    None
}

/// Per-pixel conversion from map units to N(H2) in m^-2.
pub struct Converter<'a> {
    map: &'a Map,
    ctx: &'a Context,
    kind: PixelUnit,
    /// Factor for the unit (to SI intensity or column), without temperature.
    base: f64,
    nu: f64,
}

impl<'a> Converter<'a> {
    /// A converter, or the reason there is none.
    pub fn new(map: &'a Map, ctx: &'a Context) -> Result<Converter<'a>, String> {
        if let Some(why) = conversion_blocker(map, ctx) {
            return Err(why);
        }
        let kind = map
            .unit
            .ok_or_else(|| "the map's unit is unknown: give --unit".to_string())?;
        let nu = map
            .wavelength_m
            .map(|w| units::C_LIGHT / w)
            .unwrap_or(f64::NAN);
        let base = match kind {
            PixelUnit::ColumnDensity { to_si } => to_si,
            PixelUnit::Extinction {
                band: ExtinctionBand::V,
            } => ctx.nh2_per_av_m2,
            PixelUnit::Extinction {
                band: ExtinctionBand::K,
            } => ctx.nh2_per_av_m2 * ctx.av_per_ak,
            PixelUnit::SurfaceBrightness { to_si } => to_si,
            PixelUnit::FluxPerBeam { to_si } => {
                to_si / map.beam.map(|b| b.solid_angle_sr()).unwrap_or(f64::NAN)
            }
            PixelUnit::FluxPerPixel { to_si } => to_si,
            // Already refused by `conversion_blocker`, with the reason.
            PixelUnit::Other => {
                return Err("the map's unit has no conversion to column density".into());
            }
        };
        Ok(Converter {
            map,
            ctx,
            kind,
            base,
            nu,
        })
    }

    /// N(H2) [m^-2] per map unit at pixel (y, x).
    pub fn factor(&self, y: usize, x: usize) -> f64 {
        if !self.kind.is_emission() {
            return self.base;
        }
        let t = self
            .ctx
            .temperature_k
            .as_ref()
            .map(|t| t.at(y, x))
            .unwrap_or(f64::NAN);
        let per_intensity = 1.0
            / (self.ctx.mu_h2
                * M_H
                * self.ctx.opacity.kappa_si(self.nu)
                * physics::planck_nu(self.nu, t));
        let mut f = self.base * per_intensity;
        if let PixelUnit::FluxPerPixel { .. } = self.kind
            && let Some(w) = &self.map.wcs
        {
            f /= w.pixel_solid_angle(x as f64, y as f64);
        }
        f
    }

    /// The factor when it is the same at every pixel: a column-density or extinction map, or
    /// an emission map with one temperature and no per-pixel solid angle.
    pub fn uniform_factor(&self) -> Option<f64> {
        let per_pixel_temperature = matches!(self.ctx.temperature_k, Some(Field::Map(_)));
        let per_pixel_area = matches!(self.kind, PixelUnit::FluxPerPixel { .. });
        if !self.kind.is_emission() {
            Some(self.base)
        } else if per_pixel_temperature || per_pixel_area {
            None
        } else {
            Some(self.factor(0, 0))
        }
    }

    /// The factor at the map centre (shown by `inspect`).
    pub fn central_factor(&self) -> f64 {
        self.factor(self.map.ny() / 2, self.map.nx() / 2)
    }
}

/// Sums over a structure's pixels (descendants included) that the physics needs.
#[derive(Debug, Clone, Copy, Default)]
struct Sums {
    n_col: f64,
    f: f64,
    f2: f64,
    n_t: f64,
    n_t_weight: f64,
    n_s2: f64,
    n_s2_weight: f64,
    /// Sum of f^2 sigma^2 over the pixels, with sigma from the noise map (0 without one).
    f2s2: f64,
}

impl Sums {
    /// Adds the sums of another set of pixels.
    fn add(&mut self, o: &Sums) {
        self.n_col += o.n_col;
        self.f += o.f;
        self.f2 += o.f2;
        self.n_t += o.n_t;
        self.n_t_weight += o.n_t_weight;
        self.n_s2 += o.n_s2;
        self.n_s2_weight += o.n_s2_weight;
        self.f2s2 += o.f2s2;
    }
}

/// Physical quantities of one structure (NaN where not computable).
#[derive(Debug, Clone, Serialize)]
pub struct Physical {
    /// Peak N(H2), cm^-2.
    pub n_peak_cm2: f64,
    /// Its noise uncertainty, cm^-2.
    pub n_peak_err_cm2: f64,
    /// Mean N(H2) over the footprint, cm^-2.
    pub n_mean_cm2: f64,
    /// Mass within the footprint, M_sun.
    pub mass: f64,
    /// Mass above the merge level, M_sun.
    pub mass_excess: f64,
    /// Noise uncertainty of either mass, M_sun.
    pub mass_err: f64,
    /// Effective radius, pc.
    pub radius_pc: f64,
    /// Beam-deconvolved effective radius, pc (NaN if unresolved: less than half the beam).
    pub radius_deconv_pc: f64,
    /// Whether R_eff <= half the beam.
    pub unresolved: bool,
    /// Moment radius 1.91 d (sigma_maj sigma_min)^(1/2) of the beam-deconvolved axes, pc
    /// (NaN where they are).
    pub radius_moment_pc: f64,
    /// Mean n(H2), cm^-3 (uniform sphere of R_eff, excess mass).
    pub density_cm3: f64,
    /// Mass-weighted dust temperature, K.
    pub temperature_k: f64,
    /// Jeans mass at the mean density, M_sun.
    pub jeans_mass: f64,
    /// Jeans length, pc.
    pub jeans_length_pc: f64,
    /// Critical Bonnor-Ebert mass for R_eff and T, M_sun.
    pub be_mass: f64,
    /// M_BE / M_excess.
    pub alpha_be: f64,
    /// Total velocity dispersion (thermal + non-thermal), km/s.
    pub sigma_kms: f64,
    /// Virial parameter 5 sigma^2 R / (G M).
    pub alpha_vir: f64,
    /// Free-fall time, years.
    pub t_ff_yr: f64,
    /// State word.
    pub state: &'static str,
}

/// C = xi_crit psi'(xi_crit) of the critical Bonnor-Ebert sphere, computed once.
pub fn be_coefficient() -> f64 {
    static C: OnceLock<f64> = OnceLock::new();
    *C.get_or_init(|| physics::LaneEmden::new(7.0, 1e-3).critical_mass_coefficient())
}

/// The state word from the stability ratios (see the module doc).
pub fn state_of(alpha_vir: f64, alpha_be: f64) -> &'static str {
    let (ratio, bound_at) = if alpha_vir.is_finite() {
        (alpha_vir, 2.0)
    } else if alpha_be.is_finite() {
        (alpha_be, 1.0)
    } else {
        return "unknown";
    };
    if ratio <= bound_at {
        "bound"
    } else if ratio <= 2.0 * bound_at {
        "marginal"
    } else {
        "unbound"
    }
}

/// Every structure's [`Sums`] (descendants included), pixel by pixel: for maps whose
/// conversion or fields vary from pixel to pixel.
fn sums_by_pixel(
    map: &Map,
    h: &Hierarchy,
    ctx: &Context,
    conv: &Converter,
    noise: Option<(ndarray::ArrayView2<f32>, f64)>,
) -> Vec<Sums> {
    let ns = h.structures.len();
    // Rows are cut into blocks whose number depends only on the map size and the number of
    // structures (never on the thread count); blocks are summed in parallel and added in
    // row order, so the sums are identical for any thread count.
    let (nrows, ncols) = h.labels.dim();
    let npix = nrows * ncols;
    let nblocks = (npix / (ns.max(1) * 64)).clamp(1, 32).min(nrows.max(1));
    let rows_per = nrows.div_ceil(nblocks).max(1);
    let blocks: Vec<Vec<Sums>> = (0..nblocks)
        .into_par_iter()
        .map(|b| {
            let mut own = vec![Sums::default(); ns];
            for y in (b * rows_per)..((b + 1) * rows_per).min(nrows) {
                for x in 0..ncols {
                    let l = h.labels[(y, x)];
                    if l < 0 {
                        continue;
                    }
                    let v = map.data[(y, x)] as f64;
                    let f = conv.factor(y, x);
                    let n = f * v;
                    let s = &mut own[l as usize];
                    s.n_col += n;
                    s.f += f;
                    s.f2 += f * f;
                    if let Some((nm, fallback)) = &noise {
                        // A pixel the noise map leaves undefined takes its median.
                        let sv = nm[(y, x)] as f64;
                        let sv = if sv.is_finite() && sv > 0.0 {
                            sv
                        } else {
                            *fallback
                        };
                        s.f2s2 += f * f * sv * sv;
                    }
                    if let Some(t) = &ctx.temperature_k {
                        let tv = t.at(y, x);
                        if tv.is_finite() {
                            s.n_t += n * tv;
                            s.n_t_weight += n;
                        }
                    }
                    if let Some(sig) = &ctx.sigma_nt {
                        let sv = sig.at(y, x);
                        if sv.is_finite() {
                            s.n_s2 += n * sv * sv;
                            s.n_s2_weight += n;
                        }
                    }
                }
            }
            own
        })
        .collect();
    let mut own = vec![Sums::default(); ns];
    for block in &blocks {
        for (o, b) in own.iter_mut().zip(block) {
            o.add(b);
        }
    }
    drop(blocks);
    // Children have larger ids than their parents: add from the last id down.
    let mut total = own;
    for id in (0..ns).rev() {
        if let Some(p) = h.structures[id].parent {
            let c = total[id];
            total[p as usize].add(&c);
        }
    }
    total
}

/// Every structure's [`Sums`] when the conversion factor `f`, the temperature and the
/// non-thermal dispersion are the same at every pixel: they follow from the sum of the map
/// over the structure, which the engine already gathered (no pass over the pixels).
fn sums_uniform(h: &Hierarchy, ctx: &Context, f: f64) -> Vec<Sums> {
    let value = |field: &Option<Field>| match field {
        Some(Field::Uniform(v)) if v.is_finite() => Some(*v),
        _ => None,
    };
    let (t, sigma) = (value(&ctx.temperature_k), value(&ctx.sigma_nt));
    h.structures
        .iter()
        .map(|s| {
            let n = s.sums.n as f64;
            let n_col = f * s.sums.sum;
            let (n_t, n_t_weight) = t.map_or((0.0, 0.0), |t| (n_col * t, n_col));
            let (n_s2, n_s2_weight) = sigma.map_or((0.0, 0.0), |v| (n_col * v * v, n_col));
            Sums {
                n_col,
                f: f * n,
                f2: f * f * n,
                n_t,
                n_t_weight,
                n_s2,
                n_s2_weight,
                f2s2: 0.0,
            }
        })
        .collect()
}

/// Scores every structure. `noise` is the map noise in map units (None if unknown); with
/// `noise_map` (the noise of each pixel, on the map's grid; `noise` is then its median, used
/// where the map is undefined), the error columns use each structure's own noise: the peak's
/// at the peak, and the sum over its pixels for the mass.
pub fn score(
    map: &Map,
    h: &Hierarchy,
    ms: &[Measurement],
    ctx: &Context,
    noise: Option<f64>,
    noise_map: Option<ndarray::ArrayView2<f32>>,
) -> Result<Vec<Physical>, String> {
    let conv = Converter::new(map, ctx)?;
    let uniform_field = |field: &Option<Field>| !matches!(field, Some(Field::Map(_)));
    let noise_map = noise_map.filter(|nm| nm.dim() == map.data.dim());
    let total = match conv.uniform_factor() {
        Some(f)
            if uniform_field(&ctx.temperature_k)
                && uniform_field(&ctx.sigma_nt)
                && noise_map.is_none() =>
        {
            sums_uniform(h, ctx, f)
        }
        _ => sums_by_pixel(
            map,
            h,
            ctx,
            &conv,
            noise_map.map(|nm| (nm, noise.unwrap_or(f64::NAN))),
        ),
    };
    let beam_px = match (map.beam, &map.wcs, crate::inspect::scale_pixel(map)) {
        (Some(b), Some(w), Some((x, y))) => b.solid_angle_sr() / w.pixel_solid_angle(x, y),
        _ => 1.0,
    };
    let beam_rad = map
        .beam
        .map(|b| (b.major_deg * b.minor_deg).sqrt().to_radians());
    // Each structure is scored on its own (in parallel; the order of the rows is kept).
    let out = h
        .structures
        .par_iter()
        .zip(ms)
        .zip(&total)
        .map(|((s, m), t)| {
            let npix = s.npix as f64;
            let f_peak = conv.factor(s.peak_y, s.peak_x);
            let nan = f64::NAN;
            let mut p = Physical {
                n_peak_cm2: s.peak_value * f_peak * 1e-4,
                n_peak_err_cm2: match noise_map {
                    Some(nm) => {
                        let sv = nm[(s.peak_y, s.peak_x)] as f64;
                        let sv = if sv.is_finite() && sv > 0.0 {
                            sv
                        } else {
                            noise.unwrap_or(nan)
                        };
                        sv * f_peak * 1e-4
                    }
                    None => noise.map(|n| n * f_peak * 1e-4).unwrap_or(nan),
                },
                n_mean_cm2: t.n_col / npix * 1e-4,
                mass: nan,
                mass_excess: nan,
                mass_err: nan,
                radius_pc: nan,
                radius_deconv_pc: nan,
                unresolved: false,
                radius_moment_pc: nan,
                density_cm3: nan,
                // One temperature for the map is every structure's, exactly (its weighted
                // mean would differ from it in the last digits).
                temperature_k: match &ctx.temperature_k {
                    Some(Field::Uniform(k)) => *k,
                    _ if t.n_t_weight > 0.0 => t.n_t / t.n_t_weight,
                    _ => nan,
                },
                jeans_mass: nan,
                jeans_length_pc: nan,
                be_mass: nan,
                alpha_be: nan,
                sigma_kms: nan,
                alpha_vir: nan,
                t_ff_yr: nan,
                state: "unknown",
            };
            let (Some(d), Some(w)) = (ctx.distance_m, map.wcs.as_ref()) else {
                return p;
            };
            // The pixel's solid angle at the centroid (the peak where the centroid is
            // undefined), as measured when the measurements had the map's WCS.
            let sr = if m.pixel_sr.is_finite() {
                m.pixel_sr
            } else if m.x.is_finite() {
                w.pixel_solid_angle(m.x, m.y)
            } else {
                w.pixel_solid_angle(s.peak_x as f64, s.peak_y as f64)
            };
            let area_m2 = sr * d * d;
            let unit_mass = ctx.mu_h2 * M_H * area_m2;
            p.mass = unit_mass * t.n_col / M_SUN;
            p.mass_excess = unit_mass * (t.n_col - m.merge_level * t.f) / M_SUN;
            // The noise of the sum over the footprint, correlated over a beam: with a noise
            // map, each pixel's own noise (the same formula when it is uniform).
            p.mass_err = match noise_map {
                Some(_) => unit_mass * (t.f2s2 * beam_px.min(npix)).sqrt() / M_SUN,
                None => noise
                    .map(|n| unit_mass * n * (t.f2 * beam_px.min(npix)).sqrt() / M_SUN)
                    .unwrap_or(nan),
            };
            let r_eff = (m.area_arcsec2 / std::f64::consts::PI).sqrt() * units::ARCSEC * d;
            p.radius_pc = r_eff / PC;
            if let Some(b) = beam_rad {
                let half = 0.5 * b * d;
                let deconvolved = (r_eff * r_eff - half * half).max(0.0).sqrt();
                p.unresolved = deconvolved < half;
                if !p.unresolved {
                    p.radius_deconv_pc = deconvolved / PC;
                }
            }
            // The deconvolved standard deviations in radians, at the distance.
            let sigma_rad = |fwhm: f64| fwhm / crate::measure::FWHM_PER_SIGMA * units::ARCSEC;
            p.radius_moment_pc = MOMENT_RADIUS_FACTOR
                * (sigma_rad(m.fwhm_major_deconv_arcsec) * sigma_rad(m.fwhm_minor_deconv_arcsec))
                    .sqrt()
                * d
                / PC;
            let m_kg = p.mass_excess * M_SUN;
            let volume = 4.0 / 3.0 * std::f64::consts::PI * r_eff.powi(3);
            let rho = m_kg / volume;
            let n_h2 = rho / (ctx.mu_h2 * M_H);
            p.density_cm3 = n_h2 * 1e-6;
            if rho > 0.0 {
                p.t_ff_yr = (3.0 * std::f64::consts::PI / (32.0 * G * rho)).sqrt() / YEAR;
            }
            let temp = p.temperature_k;
            if temp.is_finite() && temp > 0.0 {
                // The library's functions (checked against astropy in
                // tests/physics_reference.rs), with the run's mean molecular weight.
                let cs = crate::physics::dust::sound_speed_with(temp, ctx.mu_p);
                if n_h2 > 0.0 {
                    p.jeans_length_pc = crate::physics::dust::jeans_length_of(cs, rho) / PC;
                    p.jeans_mass = crate::physics::dust::jeans_mass_of(cs, rho) / M_SUN;
                }
                p.be_mass = be_coefficient() * r_eff * cs * cs / G / M_SUN;
                if m_kg > 0.0 {
                    p.alpha_be = p.be_mass / p.mass_excess;
                }
                let s2_nt = if t.n_s2_weight > 0.0 {
                    t.n_s2 / t.n_s2_weight
                } else {
                    nan
                };
                if s2_nt.is_finite() {
                    let sigma2 = cs * cs + s2_nt;
                    p.sigma_kms = sigma2.sqrt() / 1e3;
                    if m_kg > 0.0 {
                        p.alpha_vir = 5.0 * sigma2 * r_eff / (G * m_kg);
                    }
                }
                p.state = state_of(p.alpha_vir, p.alpha_be);
            }
            p
        })
        .collect();
    Ok(out)
}

// Checks of the physical inputs: values no molecular cloud has are refused as mistakes (most
// often a unit slip), values far beyond the usual warned about.

/// The highest temperature cairn takes, in kelvin (`--temperature` and every pixel of
/// `--temperature-map`): dust sublimates near 1500-2000 K and molecular gas is dissociated
/// long before (common practice; synth keeps to the same range).
pub const T_HOTTEST_K: f64 = 2000.0;

/// The fastest non-thermal velocity dispersion cairn takes, in km/s (`--sigma-nt` and every
/// pixel of `--sigma-nt-map`), and the one above which it warns. cairn's own judgement from
/// common practice: molecular clouds and their cores show dispersions of some tenths of a
/// km/s to a few km/s, the most turbulent clouds some tens; 1000 km/s is far beyond the
/// motions of gas in any molecular cloud, so such a value is a mistake (a dispersion in m/s
/// read as km/s lands above the warning or there).
pub const SIGMA_NT_FASTEST_KMS: f64 = 1000.0;
pub const SIGMA_NT_WARN_KMS: f64 = 50.0;

/// The largest finite value of `a` and its (row, column); None when none is finite.
fn largest(a: &ndarray::Array2<f32>) -> Option<((usize, usize), f32)> {
    a.indexed_iter()
        .filter(|(_, v)| v.is_finite())
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, &v)| (i, v))
}

/// A uniform non-thermal dispersion of `kms` km/s, as typed (`typed`, the option's value):
/// refused above [`SIGMA_NT_FASTEST_KMS`] (the sentence returned), and a warning above
/// [`SIGMA_NT_WARN_KMS`].
pub fn check_sigma_nt(kms: f64, typed: &str) -> Result<Option<String>, String> {
    if kms > SIGMA_NT_FASTEST_KMS {
        return Err(format!(
            "--sigma-nt {typed} is faster than any gas motion in a molecular cloud (above {SIGMA_NT_FASTEST_KMS} km/s); give the one-dimensional non-thermal dispersion with its unit, such as 0.3km/s or 300m/s."
        ));
    }
    Ok((kms > SIGMA_NT_WARN_KMS).then(|| {
        format!(
            "--sigma-nt {typed} is more than the non-thermal dispersions of molecular clouds (some tenths of a km/s to some tens, cairn warns above {SIGMA_NT_WARN_KMS} km/s); check its unit ({} m/s would be {} km/s), since every alpha_vir and virial state scales with it",
            units::tidy(kms),
            units::tidy(kms / 1e3)
        )
    }))
}

/// A velocity-dispersion map `m` (km/s) read from `path` for `map`, its BUNIT as written
/// (`bunit`, empty without one): refused where it has no value on the map's data or a pixel
/// above [`SIGMA_NT_FASTEST_KMS`] (with a hint at m/s read as km/s), and a warning above
/// [`SIGMA_NT_WARN_KMS`].
pub fn check_sigma_nt_map(
    map: &Map,
    p: &std::path::Path,
    m: &Array2<f32>,
    bunit: &str,
) -> Result<Option<String>, crate::error::Error> {
    use crate::error::Error;
    // A map with no value where the map has data gives no structure an alpha_vir.
    if !m
        .iter()
        .zip(map.data.iter())
        .any(|(s, v)| s.is_finite() && v.is_finite())
    {
        return Err(Error::input(
            p,
            if m.iter().any(|s| s.is_finite()) {
                format!(
                    "has no defined pixel where the map {} has data (all are NaN there), so no structure would have a virial parameter; give a velocity-dispersion map with values there, or --sigma-nt.",
                    map.path.display()
                )
            } else {
                "has no defined pixel (all are NaN), so no structure would have a virial parameter; give a velocity-dispersion map with values, or --sigma-nt.".to_string()
            },
        ));
    }
    if let Some(((y, x), v)) = largest(m) {
        let v = units::f32_as_given(v);
        // Values in m/s in a map without BUNIT (which is read in km/s) come out a
        // thousand times too fast.
        let bare = bunit.is_empty();
        let hint = |fix: &str| {
            if bare && v / 1e3 <= SIGMA_NT_WARN_KMS {
                format!(
                    "its values look like m/s ({} m/s is {} km/s), while a map without BUNIT is read in km/s: give it BUNIT 'm/s' (or its values in km/s)",
                    units::tidy(v),
                    units::tidy(v / 1e3)
                )
            } else {
                fix.to_string()
            }
        };
        if v > SIGMA_NT_FASTEST_KMS {
            return Err(Error::input(
                p,
                format!(
                    "holds {} km/s at pixel ({x}, {y}), faster than any gas motion in a molecular cloud (above {SIGMA_NT_FASTEST_KMS} km/s); {}.",
                    units::tidy(v),
                    hint("mark such pixels as NaN (they are then left out) or correct the map")
                ),
            ));
        }
        if v > SIGMA_NT_WARN_KMS {
            return Ok(Some(format!(
                "the velocity-dispersion map {} holds up to {} km/s (at pixel ({x}, {y})), more than the non-thermal dispersions of molecular clouds (some tenths of a km/s to some tens, cairn warns above {SIGMA_NT_WARN_KMS} km/s); {}",
                p.display(),
                units::tidy(v),
                hint(
                    "check its unit (its BUNIT, or km/s without one), since the alpha_vir and virial states of the structures there scale with it"
                )
            )));
        }
    }
    Ok(None)
}

/// A temperature map `t` (K) read from `p`: refused where a pixel is colder than the cosmic
/// microwave background or hotter than [`T_HOTTEST_K`] (with a hint at millikelvin when every
/// value reads as a cloud's temperature in thousandths).
pub fn check_temperature_map(
    p: &std::path::Path,
    t: &Array2<f32>,
) -> Result<(), crate::error::Error> {
    use crate::error::Error;
    let t_cmb = crate::physics::constants::T_CMB;
    let coldest = t
        .indexed_iter()
        .filter(|(_, v)| v.is_finite())
        .min_by(|a, b| a.1.total_cmp(b.1));
    if let Some(((y, x), &v)) = coldest.filter(|(_, v)| (**v as f64) < t_cmb) {
        return Err(Error::input(
            p,
            format!(
                "holds {} K at pixel ({x}, {y}), colder than the cosmic microwave background ({t_cmb} K), which no dust or gas in a molecular cloud is; mark such pixels as NaN (they then take the map's median) or correct the map.",
                units::tidy(v as f64)
            ),
        ));
    }
    // The same limit as --temperature's. A map whose every value lies in the range in
    // thousandths of a kelvin was most likely written in mK.
    if let (Some(((y, x), v)), Some((_, &lo))) = (largest(t), coldest) {
        let (v, lo) = (units::f32_as_given(v), lo as f64);
        if v > T_HOTTEST_K {
            // Dust in star-forming clouds is some 8 K to some 100 K warm (common
            // practice): a map whose values in thousandths lie there was in mK.
            let hint = if lo / 1e3 >= t_cmb && v / 1e3 <= 200.0 {
                format!(
                    "its values look like millikelvin ({} mK is {} K): give the map in kelvin, its values divided by 1000",
                    units::tidy(v),
                    units::tidy(v / 1e3),
                )
            } else {
                "give the temperatures in kelvin, mark such pixels as NaN (they then take the map's median) or correct the map".to_string()
            };
            return Err(Error::input(
                p,
                format!(
                    "holds {} K at pixel ({x}, {y}), hotter than dust survives or molecules hold together (about {T_HOTTEST_K} K); {hint}.",
                    units::tidy(v)
                ),
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{self, CorePopulation, EmissionUnit, Output, SynthSpec};

    /// Far on the Wien side the Planck function underflows to zero (exp(h nu / k T) overflows
    /// past h nu / k T = 709.78, the logarithm of the largest double): the conversion is
    /// refused with the reason instead of giving infinite columns. h c / k = 14388 um K
    /// (CODATA 2018 exact constants), so 1 um at 10 K gives 1439 and 850 um at 10 K 1.69.
    #[test]
    fn a_wavelength_far_on_the_wien_side_of_the_dust_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let spec = SynthSpec {
            nx: 32,
            ny: 32,
            output: Output::DustEmission {
                wavelength_um: 850.0,
                temperature_k: 15.0,
                unit: EmissionUnit::MJyPerSr,
                opacity: DustOpacity::default(),
            },
            noise_rms: 0.0,
            seed: 3,
            ..Default::default()
        };
        let s = synth::generate(&spec).unwrap();
        let path = dir.path().join("m.fits");
        crate::fits_write::write_image_f32(&path, s.data.view(), &s.header, false).unwrap();
        let mut map = crate::map::load(&path, &Default::default()).unwrap();
        let ctx = Context {
            temperature_k: Some(Field::Uniform(10.0)),
            ..Default::default()
        };
        assert_eq!(conversion_blocker(&map, &ctx), None);
        assert!(Converter::new(&map, &ctx).unwrap().factor(0, 0).is_finite());
        map.wavelength_m = Some(1.0e-6);
        let why = conversion_blocker(&map, &ctx).expect("refused at 1 um and 10 K");
        assert!(why.contains("h nu / k T = 1439"), "{why}");
        // The same through a temperature map: its coldest defined pixel decides.
        let mut t = Array2::from_elem((32, 32), 1000.0f32);
        t[(3, 4)] = f32::NAN;
        t[(5, 6)] = 10.0;
        let ctx = Context {
            temperature_k: Some(Field::Map(t)),
            ..Default::default()
        };
        assert!(conversion_blocker(&map, &ctx).is_some());
        map.wavelength_m = Some(850e-6);
        assert_eq!(conversion_blocker(&map, &ctx), None);
    }

    /// The sums taken from the engine's map sums equal those gathered pixel by pixel (to
    /// rounding), on a column-density map and on a Jy/beam dust-emission map at one
    /// temperature.
    #[test]
    fn uniform_sums_equal_the_pixel_by_pixel_sums() {
        let dir = tempfile::tempdir().unwrap();
        let outputs = [
            Output::ColumnDensity,
            Output::DustEmission {
                wavelength_um: 850.0,
                temperature_k: 15.0,
                unit: EmissionUnit::JyPerBeam,
                opacity: DustOpacity::default(),
            },
        ];
        for (i, output) in outputs.into_iter().enumerate() {
            let spec = SynthSpec {
                nx: 160,
                ny: 120,
                population: Some(CorePopulation {
                    count: 12,
                    mass_min_msun: 0.5,
                    mass_max_msun: 5.0,
                    mass_index: 2.35,
                    radius_min_pc: 0.02,
                    radius_max_pc: 0.05,
                    profile: synth::Profile::Gaussian,
                    margin_px: 10.0,
                }),
                output,
                noise_rms: 0.0,
                seed: 7,
                ..Default::default()
            };
            let s = synth::generate(&spec).unwrap();
            let path = dir.path().join(format!("m{i}.fits"));
            crate::fits_write::write_image_f32(&path, s.data.view(), &s.header, false).unwrap();
            let map = crate::map::load(&path, &Default::default()).unwrap();
            let floor = map.data.iter().copied().fold(f32::INFINITY, f32::min) as f64;
            let top = map.data.iter().copied().fold(f32::NEG_INFINITY, f32::max) as f64;
            let params = crate::hierarchy::Params {
                floor: floor + 0.2 * (top - floor),
                prominence: 0.02 * (top - floor),
                min_area: 4,
                connectivity: crate::hierarchy::Connectivity::Eight,
            };
            let h = crate::hierarchy::build(map.data.view(), &params).unwrap();
            assert!(h.structures.len() > 3, "{} structures", h.structures.len());
            let ctx = Context {
                temperature_k: Some(Field::Uniform(15.0)),
                sigma_nt: Some(Field::Uniform(250.0)),
                ..Default::default()
            };
            let conv = Converter::new(&map, &ctx).unwrap();
            let f = conv.uniform_factor().expect("a uniform factor");
            let fast = sums_uniform(&h, &ctx, f);
            let slow = sums_by_pixel(&map, &h, &ctx, &conv, None);
            let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * a.abs().max(b.abs());
            for (a, b) in fast.iter().zip(&slow) {
                for (x, y) in [
                    (a.n_col, b.n_col),
                    (a.f, b.f),
                    (a.f2, b.f2),
                    (a.n_t, b.n_t),
                    (a.n_t_weight, b.n_t_weight),
                    (a.n_s2, b.n_s2),
                    (a.n_s2_weight, b.n_s2_weight),
                ] {
                    assert!(close(x, y), "map {i}: {a:?} against {b:?}");
                }
            }
        }
    }
}
