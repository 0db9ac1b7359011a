//! Sky coordinates of a map: the FITS World Coordinate System for celestial images.
//!
//! Owns the conversion between pixel positions and celestial (longitude, latitude) for the
//! first two image axes, following Greisen & Calabretta 2002 (A&A 395, 1061, "Paper I") for
//! the linear part (CRPIX, PC/CD/CDELT/CROTA, CUNIT) and Calabretta & Greisen 2002 (A&A 395,
//! 1077, "Paper II") for the spherical projections (private submodule `proj`) and the
//! rotation from native to celestial spherical coordinates (LONPOLE, LATPOLE, sec. 2.3-2.4).
//! It also owns the celestial frame of the map ([`SkyFrame`]) and conversions between frames
//! ([`convert_frame`]: ICRS, FK5 at any Julian equinox, galactic, and from FK4).
//!
//! Supported: the linear part as CD matrix, PC + CDELT, or CDELT + CROTA (Paper II sec. 6.1);
//! CUNIT deg (also spelt degree, degrees), arcmin, arcsec, mas, rad, without case; CTYPEs
//! without case (written back in upper case); CTYPEs without a projection code (`RA`, `DEC`,
//! `GLON`, ...) as longitude and latitude linear in the pixels, as WCSLIB reads them; the
//! projections AZP, SZP, TAN, STG, SIN (with the
//! slant parameters, and NCP read as SIN with PV_2 = cot(delta0)), ARC, ZPN, ZEA, AIR, CYP,
//! CEA, CAR, MER, SFL (and GLS read as SFL with its fiducial point at delta0), PAR, MOL, AIT,
//! COP, COE, COD, COO, BON, PCO, the spherical cubes TSC and QSC (not the COBE CSC), and
//! HEALPix HPX (Calabretta & Roukema 2007, MNRAS 381, 865); projection parameters PVi_m of
//! the latitude axis; PVi_0..4 of the longitude axis (fiducial-point offset flag, phi0,
//! theta0, LONPOLE, LATPOLE);
//! longitude and latitude axes in either order; SIP distortion polynomials (`-SIP` CTYPEs,
//! Shupe et al. 2005; private submodule `sip`). Unsupported projection codes and other
//! distortions, singular matrices and inconsistent axis pairs are errors ([`WcsError`])
//! naming the keyword. The numerical results agree with WCSLIB (as wrapped by astropy.wcs,
//! with astropy's own SIP code for the distortion) to ~1e-10 degree;
//! see tests/wcs_astropy.rs.
//!
//! Conventions used throughout:
//! * Pixel coordinates are ZERO-based: pixel (0, 0) is the centre of the first pixel; x runs
//!   along NAXIS1 (array column), y along NAXIS2 (array row). The FITS pixel coordinate of
//!   Paper I is p = x + 1.
//! * All angles are in degrees; longitudes are returned in [0, 360).
//! * Only the first two axes are read; other axes of a cube (e.g. a length-1 frequency axis)
//!   are ignored, and the map is assumed not to couple them with the celestial axes.
//! * Points without an image in the projection give `None`.

mod frames;
mod proj;
mod sip;
mod trig;

pub use frames::convert_frame;

use crate::header::{Card, Header, Value};
use proj::{Params, Projection};
use trig::{R2D, acosd, atan2d, cosd, norm180, norm360, sincosd, sind};

use std::fmt;

/// The celestial reference frame of a map, from the CTYPE prefixes and RADESYS/EQUINOX.
#[derive(Debug, Clone, PartialEq)]
pub enum SkyFrame {
    /// International Celestial Reference System (RA/DEC).
    Icrs,
    /// FK5 equatorial coordinates at a Julian equinox (years).
    Fk5 { equinox: f64 },
    /// FK4 equatorial coordinates at a Besselian equinox (years).
    Fk4 { equinox: f64 },
    /// Galactic coordinates (GLON/GLAT).
    Galactic,
    /// Ecliptic coordinates (ELON/ELAT).
    Ecliptic,
    /// Any other pair, named by its CTYPE prefix (e.g. "SLON", or "RA/FK4-NO-E").
    Other(String),
}

impl SkyFrame {
    /// Whether the frame's longitude is a right ascension (ICRS, FK5, FK4).
    pub fn is_equatorial(&self) -> bool {
        matches!(
            self,
            SkyFrame::Icrs | SkyFrame::Fk5 { .. } | SkyFrame::Fk4 { .. }
        )
    }
}

/// A WCS problem in a header, as one sentence naming the keyword.
#[derive(Debug, Clone, PartialEq)]
pub struct WcsError(pub String);

impl fmt::Display for WcsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for WcsError {}

/// The celestial coordinate system of the first two axes of a map.
#[derive(Debug, Clone)]
pub struct Wcs {
    /// Which of the two image axes (0 or 1) carries longitude.
    lon_axis: usize,
    /// CTYPE of axes 1 and 2, with NCP/GLS written as SIN/SFL.
    ctype: [String; 2],
    /// Reference pixel, FITS one-based (CRPIX1, CRPIX2).
    crpix: [f64; 2],
    /// Reference values of axes 1 and 2, degrees.
    crval: [f64; 2],
    /// Linear transformation, degrees of intermediate world coordinate per pixel:
    /// w_i = sum_j lin[i][j] (p_j - crpix_j) (Paper I eq. 1-3 with CDELT and units folded in).
    lin: [[f64; 2]; 2],
    /// Inverse of `lin`.
    inv: [[f64; 2]; 2],
    proj: Projection,
    /// SIP distortion polynomials (`-SIP` CTYPEs), applied to the pixel offsets before `lin`.
    sip: Option<sip::Sip>,
    /// Longitude and latitude linear in the pixels (CTYPEs without a projection code, such
    /// as `RA` and `DEC`), held as CAR with its fiducial point at the reference point.
    linear: bool,
    /// Projection parameters of the latitude axis as given (for `header_cards`).
    pv: Params,
    frame: SkyFrame,
    /// RADESYS and EQUINOX as read (for `header_cards`).
    radesys: Option<String>,
    equinox: Option<f64>,
    /// Euler angles of the rotation: celestial coordinates of the native pole (alpha_p,
    /// delta_p) and native longitude of the celestial pole phi_p (= LONPOLE).
    alpha_p: f64,
    delta_p: f64,
    phi_p: f64,
    sin_dp: f64,
    cos_dp: f64,
}

/// What a CTYPE says about one axis.
#[derive(Debug, Clone, PartialEq)]
enum AxisKind {
    Lon { pair: String, code: String },
    Lat { pair: String, code: String },
    NotCelestial,
}

/// What a CTYPE says about one axis, read without case (a lower-case `ra---tan` is read as
/// `RA---TAN`). A bare coordinate name (`RA`, `DEC`, `GLON`, `GLAT`, ...) is a celestial axis
/// without a projection, with an empty code: WCSLIB (astropy 8.0.2's WCS) reads such a pair
/// as longitude and latitude linear in the pixels.
fn axis_kind(ctype: &str) -> AxisKind {
    let t = ctype.trim().to_ascii_uppercase();
    let (coord, code) = if !t.is_empty() && t.len() <= 4 && !t.contains('-') {
        (t.clone(), String::new())
    } else if t.len() < 6 || t.as_bytes()[4] != b'-' {
        return AxisKind::NotCelestial;
    } else {
        let code = t[5..].trim_start_matches('-').trim().to_string();
        if code.is_empty() {
            return AxisKind::NotCelestial;
        }
        (t[..4].trim_end_matches('-').to_string(), code)
    };
    let (is_lon, pair) = match coord.as_str() {
        "RA" => (true, "RA/DEC".to_string()),
        "DEC" => (false, "RA/DEC".to_string()),
        c if c.len() == 4 && c.ends_with("LON") => (true, c[..1].to_string()),
        c if c.len() == 4 && c.ends_with("LAT") => (false, c[..1].to_string()),
        c if c.len() == 4 && c.ends_with("LN") => (true, c[..2].to_string()),
        c if c.len() == 4 && c.ends_with("LT") => (false, c[..2].to_string()),
        _ => return AxisKind::NotCelestial,
    };
    if is_lon {
        AxisKind::Lon { pair, code }
    } else {
        AxisKind::Lat { pair, code }
    }
}

/// Degrees per unit of a CUNIT value.
fn unit_scale(h: &Header, axis: usize) -> Result<f64, WcsError> {
    let key = format!("CUNIT{axis}");
    let u = h.get_str(&key).unwrap_or("").trim().to_string();
    match u.to_ascii_lowercase().as_str() {
        // `degree` and `degrees` are not the standard's spelling (FITS Standard 4.0, Table 3:
        // `deg`), but WCSLIB's unit fixes read them as deg, as astropy 8.0.2's WCS does.
        "" | "deg" | "degree" | "degrees" => Ok(1.0),
        "arcmin" => Ok(1.0 / 60.0),
        "arcsec" => Ok(1.0 / 3600.0),
        "mas" => Ok(1.0 / 3.6e6),
        "rad" => Ok(R2D),
        _ => Err(WcsError(format!(
            "unknown angular unit in {key} = '{u}' (cairn reads deg (or degree, degrees), arcmin, arcsec, mas, rad)"
        ))),
    }
}

fn num(h: &Header, key: &str) -> Result<Option<f64>, WcsError> {
    match h.get(key) {
        None => Ok(None),
        Some(v) => match v.as_f64() {
            Some(x) if x.is_finite() => Ok(Some(x)),
            _ => Err(WcsError(format!("{key} = {v} is not a finite number"))),
        },
    }
}

impl Wcs {
    /// Reads the celestial WCS of the first two axes. `Ok(None)` when those axes carry no
    /// celestial coordinates (the map then loads in pixel units); `Err` for a header that
    /// claims celestial axes but cannot be used, with a sentence naming the keyword.
    pub fn from_header(h: &Header) -> Result<Option<Wcs>, WcsError> {
        // A WCS keyword given more than once counts by its last card, as in WCSLIB.
        let last = h.last_of(is_wcs_key);
        let h = &last;
        let ct = [
            h.get_str("CTYPE1").unwrap_or("").trim().to_string(),
            h.get_str("CTYPE2").unwrap_or("").trim().to_string(),
        ];
        let kinds = [axis_kind(&ct[0]), axis_kind(&ct[1])];
        let (lon_axis, pair, code) = match (&kinds[0], &kinds[1]) {
            (AxisKind::NotCelestial, AxisKind::NotCelestial) => return Ok(None),
            (AxisKind::Lon { pair: p1, code: c1 }, AxisKind::Lat { pair: p2, code: c2 })
            | (AxisKind::Lat { pair: p2, code: c2 }, AxisKind::Lon { pair: p1, code: c1 }) => {
                if p1 != p2 {
                    return Err(WcsError(format!(
                        "CTYPE1 = '{}' and CTYPE2 = '{}' are not a longitude/latitude pair of the same system",
                        ct[0], ct[1]
                    )));
                }
                if c1 != c2 {
                    let bare = [&kinds[0], &kinds[1]].iter().position(|k| {
                        matches!(k, AxisKind::Lon { code, .. } | AxisKind::Lat { code, .. } if code.is_empty())
                    });
                    return Err(WcsError(match bare {
                        Some(i) => format!(
                            "CTYPE{} = '{}' has no projection code but CTYPE{} = '{}' has one; give both axes the same code",
                            i + 1,
                            ct[i],
                            2 - i,
                            ct[1 - i]
                        ),
                        None => format!(
                            "CTYPE1 = '{}' and CTYPE2 = '{}' name different projections",
                            ct[0], ct[1]
                        ),
                    }));
                }
                let lon_axis = if matches!(kinds[0], AxisKind::Lon { .. }) {
                    0
                } else {
                    1
                };
                (lon_axis, p1.clone(), c1.clone())
            }
            // A bare coordinate name beside an axis that is not its partner (`RA` beside
            // `VRAD` on a position-velocity map, or `RA` twice): no celestial pair, as
            // WCSLIB (astropy 8.0.2's WCS) reads it, so the map loads in pixel units.
            // (Only where no axis has a projection code: `RA` beside `RA---TAN` is refused.)
            _ if kinds.iter().all(|k| match k {
                AxisKind::Lon { code, .. } | AxisKind::Lat { code, .. } => code.is_empty(),
                AxisKind::NotCelestial => true,
            }) =>
            {
                return Ok(None);
            }
            _ => {
                let (i, j) = if kinds[0] == AxisKind::NotCelestial {
                    (1, 0)
                } else {
                    (0, 1)
                };
                return Err(WcsError(format!(
                    "CTYPE{} = '{}' is celestial but CTYPE{} = '{}' is not its matching longitude or latitude axis",
                    i + 1,
                    ct[i],
                    j + 1,
                    ct[j]
                )));
            }
        };
        let lat_axis = 1 - lon_axis;
        let (la, lo) = (lat_axis + 1, lon_axis + 1);
        // A distortion suffix after the projection code: SIP is read, others are named.
        let (code, sip) = match code.split_once('-') {
            None => (code, None),
            Some((base, "SIP")) => (base.to_string(), Some(sip::Sip::read(h)?)),
            Some((base, other)) => {
                return Err(WcsError(format!(
                    "CTYPE{lo} = '{}' names the distortion '{other}' of projection {base}, which cairn does not read (it reads SIP); resample the map to an undistorted grid",
                    ct[lon_axis]
                )));
            }
        };

        // A TAN header with PV cards of index 5 and more carries the distortion polynomial of
        // the TPV convention under its pre-2012 name (TAN itself takes PVi_0 to PVi_4 only:
        // Calabretta & Greisen 2002, Table 13; read as TPV by astropy 8.0.2's WCS, following
        // Shupe et al. 2012, sec. 7). Read as TAN it would put every position far off.
        if code == "TAN" && sip.is_none() {
            for ax in [lo, la] {
                for j in 5..40 {
                    if num(h, &format!("PV{ax}_{j}"))?.is_some() {
                        return Err(WcsError(format!(
                            "CTYPE{lo} = '{}' comes with PV{ax}_{j}, a distortion polynomial of the TPV convention written under the name TAN (TAN takes no PV card past PV{ax}_4), which cairn does not read (it reads SIP); resample the map to an undistorted grid",
                            ct[lon_axis]
                        )));
                    }
                }
            }
        }

        // Units and reference point.
        let scale = [unit_scale(h, 1)?, unit_scale(h, 2)?];
        let mut crpix = [0.0; 2];
        let mut crval = [0.0; 2];
        for i in 0..2 {
            crpix[i] = num(h, &format!("CRPIX{}", i + 1))?.unwrap_or(0.0);
            crval[i] = num(h, &format!("CRVAL{}", i + 1))?.unwrap_or(0.0) * scale[i];
        }
        let lin = Self::read_matrix(h, la, &scale)?;
        let det = lin[0][0] * lin[1][1] - lin[0][1] * lin[1][0];
        if det == 0.0 || !det.is_finite() {
            return Err(WcsError(format!(
                "the pixel-to-sky matrix of axes 1 and 2 (from {}) is singular: its determinant is zero",
                Self::matrix_source(h)
            )));
        }
        let inv = [
            [lin[1][1] / det, -lin[0][1] / det],
            [-lin[1][0] / det, lin[0][0] / det],
        ];

        // Projection parameters.
        let mut pv: Params = [None; 30];
        for (m, slot) in pv.iter_mut().enumerate() {
            *slot = num(h, &format!("PV{la}_{m}"))?;
        }
        let lon0 = crval[lon_axis];
        let lat0 = crval[lat_axis];
        if lat0.is_nan() || lat0.abs() > 90.0 {
            return Err(WcsError(format!(
                "CRVAL{la} = {lat0} is not a latitude (it must lie between -90 and 90 degrees)"
            )));
        }
        let mut code = code;
        if code == "NCP" {
            // NCP is SIN with xi = 0, eta = cot(delta0) (Paper II sec. 5.1.5).
            let s = sind(lat0);
            if s == 0.0 {
                return Err(WcsError(format!(
                    "NCP projection in CTYPE{lo} = '{}' needs a reference latitude CRVAL{la} away from 0",
                    ct[lon_axis]
                )));
            }
            pv[1] = Some(0.0);
            pv[2] = Some(cosd(lat0) / s);
            code = "SIN".into();
        }
        let phi0 = num(h, &format!("PV{lo}_1"))?;
        let mut theta0 = num(h, &format!("PV{lo}_2"))?;
        let mut use_offset = num(h, &format!("PV{lo}_0"))?.is_some_and(|v| v != 0.0);
        if code == "GLS" && theta0.is_none() {
            // GLS is SFL with the fiducial point at native latitude delta0, offset to the
            // plane's origin, so that native and celestial poles coincide (Paper II
            // sec. 6.1.4).
            theta0 = Some(lat0);
            use_offset = true;
        }
        // Without a projection code, longitude and latitude are linear in the pixels, as
        // WCSLIB reads such axes: CAR with its fiducial point at the reference point and the
        // plane offset to it (as GLS is read), its native pole at the celestial pole; the
        // header's PV cards, LONPOLE and LATPOLE do not apply.
        let linear = code.is_empty();
        let (code, phi0, theta0, use_offset) = if linear {
            pv = [None; 30];
            ("CAR".to_string(), Some(0.0), Some(lat0), true)
        } else {
            (code, phi0, theta0, use_offset)
        };
        // Distortion conventions written in place of the projection code (TPV, TNX and ZPX
        // are TAN or ZPN with polynomial distortions that WCSLIB and astropy read as such):
        // named as what they are.
        if matches!(code.as_str(), "TPV" | "TNX" | "ZPX") {
            return Err(WcsError(format!(
                "CTYPE{lo} = '{}' names the {code} distortion convention (a projection with distortion polynomials), which cairn does not read (it reads SIP); resample the map to an undistorted grid, such as a plain TAN",
                ct[lon_axis]
            )));
        }
        let proj = Projection::new(&code, &pv, phi0, theta0, use_offset).map_err(|e| {
            if e.starts_with("unknown projection code") {
                WcsError(format!(
                    "{e} in CTYPE{lo} = '{}' (cairn reads {})",
                    ct[lon_axis],
                    proj::SUPPORTED
                ))
            } else {
                WcsError(format!("{e} (CTYPE{lo} = '{}')", ct[lon_axis]))
            }
        })?;

        let lonpole = match num(h, &format!("PV{lo}_3"))? {
            Some(v) => Some(v),
            None => num(h, "LONPOLE")?,
        };
        let latpole = match num(h, &format!("PV{lo}_4"))? {
            Some(v) => Some(v),
            None => num(h, "LATPOLE")?,
        };

        let radesys = h
            .get_str("RADESYS")
            .or_else(|| h.get_str("RADECSYS"))
            .map(|s| s.trim().to_ascii_uppercase())
            .filter(|s| !s.is_empty());
        // A non-numeric EQUINOX (e.g. 'J2000') is treated as absent, like a missing one.
        let equinox = h
            .get_f64("EQUINOX")
            .or_else(|| h.get_f64("EPOCH"))
            .filter(|e| e.is_finite());
        let frame = Self::frame_of(&pair, radesys.as_deref(), equinox);

        let (alpha_p, delta_p, phi_p) = if linear {
            // Native pole at the celestial pole, native longitude phi at celestial
            // longitude lon0 + phi (Paper II eq. 2 with delta_p = 90, phi_p = 0).
            Ok((lon0 - 180.0, 90.0, 0.0))
        } else {
            Self::native_pole(lon0, lat0, proj.phi0, proj.theta0, lonpole, latpole)
        }
        .map_err(|e| {
            let given = |k: &str, v: Option<f64>| match v {
                Some(v) => format!(", {k} = {v}"),
                None => String::new(),
            };
            WcsError(format!(
                "{e} (CRVAL{lo} = {lon0}, CRVAL{la} = {lat0}{}{})",
                given("LONPOLE", lonpole),
                given("LATPOLE", latpole)
            ))
        })?;
        let (sin_dp, cos_dp) = sincosd(delta_p);
        // The CTYPEs in the standard's upper case (a lower-case `ra---tan` is read, but
        // written as `RA---TAN`, the spelling WCSLIB reads).
        let proj_code = proj.code.clone();
        let mut ctype = ct.clone();
        for (i, c) in ctype.iter_mut().enumerate() {
            let upper = ct[i].to_ascii_uppercase();
            if linear {
                *c = upper;
                continue;
            }
            *c = format!("{}-{proj_code}", &upper[..4]);
            if sip.is_some() {
                c.push_str("-SIP");
            }
        }
        Ok(Some(Wcs {
            lon_axis,
            ctype,
            crpix,
            crval,
            lin,
            inv,
            proj,
            sip,
            linear,
            pv,
            frame,
            radesys,
            equinox,
            alpha_p,
            delta_p,
            phi_p,
            sin_dp,
            cos_dp,
        }))
    }

    fn matrix_source(h: &Header) -> &'static str {
        let any = |p: &str| (1..=2).any(|i| (1..=2).any(|j| h.contains(&format!("{p}{i}_{j}"))));
        if any_pc_card(h) {
            "PCi_j and CDELTi"
        } else if any("CD") {
            "CDi_j"
        } else if h.contains("CROTA2") || h.contains("CROTA1") {
            "CDELTi and CROTAi"
        } else {
            "CDELTi"
        }
    }

    /// The linear transformation in degrees per pixel: PCi_j with CDELTi takes precedence,
    /// then CDi_j, then CDELTi with CROTAi of the latitude axis (Paper II sec. 6.1 eq. 188),
    /// then CDELTi alone.
    fn read_matrix(h: &Header, la: usize, scale: &[f64; 2]) -> Result<[[f64; 2]; 2], WcsError> {
        let get = |k: String| num(h, &k);
        let has = |p: &str| (1..=2).any(|i| (1..=2).any(|j| h.contains(&format!("{p}{i}_{j}"))));
        let mut m = [[0.0; 2]; 2];
        let mut cdelt = [1.0; 2];
        for (i, c) in cdelt.iter_mut().enumerate() {
            *c = get(format!("CDELT{}", i + 1))?.unwrap_or(1.0);
        }
        // A PCi_j card of any axis (a length-1 spectral axis's PC3_3, say) makes the header's
        // matrix a PC matrix, with the unit matrix's values for the cards not given, and
        // CROTAi is then not read, as WCSLIB (and so astropy.wcs) reads it.
        if has("PC") || any_pc_card(h) {
            for (i, row) in m.iter_mut().enumerate() {
                for (j, v) in row.iter_mut().enumerate() {
                    let d = if i == j { 1.0 } else { 0.0 };
                    *v = cdelt[i] * get(format!("PC{}_{}", i + 1, j + 1))?.unwrap_or(d);
                }
            }
        } else if has("CD") {
            for (i, row) in m.iter_mut().enumerate() {
                for (j, v) in row.iter_mut().enumerate() {
                    *v = get(format!("CD{}_{}", i + 1, j + 1))?.unwrap_or(0.0);
                }
            }
        } else {
            // With lng and lat the axes' places (whichever is stored first), as WCSLIB builds
            // it: CD_lng,lng = CDELT_lng cos, CD_lng,lat = -CDELT_lat sin,
            // CD_lat,lng = CDELT_lng sin, CD_lat,lat = CDELT_lat cos; so the rotation has
            // the same sense on the sky for a map stored latitude first.
            let rho = get(format!("CROTA{la}"))?.unwrap_or(0.0);
            let (s, c) = sincosd(rho);
            let (lat, lng) = (la - 1, 2 - la);
            m[lng][lng] = cdelt[lng] * c;
            m[lng][lat] = -cdelt[lat] * s;
            m[lat][lng] = cdelt[lng] * s;
            m[lat][lat] = cdelt[lat] * c;
        }
        for i in 0..2 {
            for v in m[i].iter_mut() {
                *v *= scale[i];
            }
        }
        Ok(m)
    }

    /// The frame from the coordinate pair and RADESYS/EQUINOX (Paper II sec. 3.1): for
    /// RA/DEC without RADESYS, ICRS when there is no EQUINOX, FK4 when EQUINOX < 1984, FK5
    /// otherwise; EQUINOX defaults to 1950 for FK4 and 2000 for FK5.
    fn frame_of(pair: &str, radesys: Option<&str>, equinox: Option<f64>) -> SkyFrame {
        match pair {
            "RA/DEC" => {
                let sys = match radesys {
                    Some(s) => s.to_string(),
                    None => match equinox {
                        None => "ICRS".into(),
                        Some(e) if e < 1984.0 => "FK4".into(),
                        Some(_) => "FK5".into(),
                    },
                };
                match sys.as_str() {
                    "ICRS" => SkyFrame::Icrs,
                    "FK5" => SkyFrame::Fk5 {
                        equinox: equinox.unwrap_or(2000.0),
                    },
                    "FK4" => SkyFrame::Fk4 {
                        equinox: equinox.unwrap_or(1950.0),
                    },
                    other => SkyFrame::Other(format!("RA/{other}")),
                }
            }
            "G" => SkyFrame::Galactic,
            "E" => SkyFrame::Ecliptic,
            p if p.len() == 1 => SkyFrame::Other(format!("{p}LON")),
            p => SkyFrame::Other(format!("{p}LN")),
        }
    }

    /// Celestial coordinates of the native pole (alpha_p, delta_p) and phi_p, from the
    /// reference point (alpha0, delta0) at native (phi0, theta0), LONPOLE and LATPOLE
    /// (Paper II sec. 2.4, eqs. 8-10 and the special cases that follow them).
    fn native_pole(
        lon0: f64,
        lat0: f64,
        phi0: f64,
        theta0: f64,
        lonpole: Option<f64>,
        latpole: Option<f64>,
    ) -> Result<(f64, f64, f64), String> {
        const TOL: f64 = 1.0e-10;
        // Default LONPOLE: 0 if delta0 >= theta0, else 180 (plus phi0 when phi0 != 0).
        let phip = lonpole.unwrap_or((if lat0 < theta0 { 180.0 } else { 0.0 }) + phi0);
        let latpole = latpole.unwrap_or(90.0);
        if theta0 == 90.0 {
            // Reference point at the native pole: the native pole is the reference point.
            return Ok((lon0, lat0, phip));
        }
        let (slat0, clat0) = sincosd(lat0);
        let (sthe0, cthe0) = sincosd(theta0);
        let sphip;
        let (u, v);
        let mut latp: Option<f64> = None;
        if phip == phi0 {
            sphip = 0.0;
            u = theta0;
            v = 90.0 - lat0;
        } else {
            let (s, cphip) = sincosd(phip - phi0);
            sphip = s;
            let x = cthe0 * cphip;
            let y = sthe0;
            let z = x.hypot(y);
            if z == 0.0 {
                if slat0 != 0.0 {
                    return Err(
                        "LONPOLE and the projection's fiducial point admit no celestial pole"
                            .into(),
                    );
                }
                // delta_p is then given by LATPOLE alone.
                latp = Some(latpole);
                u = 0.0;
                v = 0.0;
            } else {
                if (slat0 / z).abs() > 1.0 {
                    return Err("LONPOLE is incompatible with the reference latitude (no solution for the native pole)".into());
                }
                u = atan2d(y, x);
                v = acosd(slat0 / z);
            }
        }
        let latp = match latp {
            Some(l) => l,
            None => {
                // Two solutions u +- v; keep the valid one, or the one closer to LATPOLE.
                let wrap = |a: f64| {
                    if a > 180.0 {
                        a - 360.0
                    } else if a < -180.0 {
                        a + 360.0
                    } else {
                        a
                    }
                };
                let l1 = wrap(u + v);
                let l2 = wrap(u - v);
                let ok1 = l1.abs() <= 90.0 + TOL;
                let ok2 = l2.abs() <= 90.0 + TOL;
                let mut l = match (ok1, ok2) {
                    (true, true) => {
                        if (latpole - l1).abs() < (latpole - l2).abs() {
                            l1
                        } else {
                            l2
                        }
                    }
                    (true, false) => l1,
                    (false, true) => l2,
                    (false, false) => {
                        return Err("no valid celestial latitude of the native pole exists".into());
                    }
                };
                if l.abs() > 90.0 && l.abs() <= 90.0 + TOL {
                    l = 90.0f64.copysign(l);
                }
                l
            }
        };
        let (slatp, clatp) = sincosd(latp);
        let z = clatp * clat0;
        let mut lngp = if z.abs() < TOL {
            if clat0.abs() < TOL {
                // Celestial pole at the fiducial point.
                lon0
            } else if latp > 0.0 {
                // Celestial north pole at the native pole.
                lon0 + phip - phi0 - 180.0
            } else {
                // Celestial south pole at the native pole.
                lon0 - phip + phi0
            }
        } else {
            let x = (sthe0 - slatp * slat0) / z;
            let y = sphip * cthe0 / clat0;
            if x == 0.0 && y == 0.0 {
                return Err(
                    "the native pole cannot be placed for these LONPOLE and LATPOLE values".into(),
                );
            }
            lon0 - atan2d(y, x)
        };
        // Keep the native pole's longitude on the same side as the reference longitude.
        if lon0 >= 0.0 {
            if lngp < 0.0 {
                lngp += 360.0;
            } else if lngp > 360.0 {
                lngp -= 360.0;
            }
        } else if lngp > 0.0 {
            lngp -= 360.0;
        } else if lngp < -360.0 {
            lngp += 360.0;
        }
        Ok((lngp, latp, phip))
    }

    /// Native (phi, theta) -> celestial (lon, lat) (Paper II eq. 2), as a unit-vector
    /// rotation with atan2 for both angles (accurate everywhere, including near the poles).
    fn native_to_celestial(&self, phi: f64, theta: f64) -> (f64, f64) {
        let (st, ct) = sincosd(theta);
        let (sd, cd) = sincosd(phi - self.phi_p);
        let x = st * self.cos_dp - ct * self.sin_dp * cd;
        let y = -ct * sd;
        let z = st * self.sin_dp + ct * self.cos_dp * cd;
        let lon = norm360(self.alpha_p + atan2d(y, x));
        let lat = atan2d(z, x.hypot(y));
        (lon, lat)
    }

    /// Celestial (lon, lat) -> native (phi, theta) (Paper II eq. 5), phi in [-180, 180].
    fn celestial_to_native(&self, lon: f64, lat: f64) -> (f64, f64) {
        let (sb, cb) = sincosd(lat);
        let (sa, ca) = sincosd(lon - self.alpha_p);
        let x = sb * self.cos_dp - cb * self.sin_dp * ca;
        let y = -cb * sa;
        let z = sb * self.sin_dp + cb * self.cos_dp * ca;
        let phi = norm180(self.phi_p + atan2d(y, x));
        let theta = atan2d(z, x.hypot(y));
        (phi, theta)
    }

    /// Projection-plane coordinates (x along longitude, y along latitude; degrees) of a pixel.
    fn plane(&self, x: f64, y: f64) -> (f64, f64) {
        let mut d = [x + 1.0 - self.crpix[0], y + 1.0 - self.crpix[1]];
        if let Some(s) = &self.sip {
            let (u, v) = s.forward(d[0], d[1]);
            d = [u, v];
        }
        let w = [
            self.lin[0][0] * d[0] + self.lin[0][1] * d[1],
            self.lin[1][0] * d[0] + self.lin[1][1] * d[1],
        ];
        if self.lon_axis == 0 {
            (w[0], w[1])
        } else {
            (w[1], w[0])
        }
    }

    /// Pixel (zero-based, see the module doc) -> (longitude, latitude) in degrees, longitude in
    /// [0, 360). `None` outside the projection's domain.
    pub fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        if !x.is_finite() || !y.is_finite() {
            return None;
        }
        let (px, py) = self.plane(x, y);
        let (phi, theta) = self.proj.x2s(px, py)?;
        Some(self.native_to_celestial(phi, theta))
    }

    /// (longitude, latitude) in degrees -> zero-based pixel. `None` when the position has no
    /// image in the projection (e.g. the far hemisphere of TAN or SIN).
    pub fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        if !lon.is_finite() || !lat.is_finite() || lat.abs() > 90.0 {
            return None;
        }
        let (phi, theta) = self.celestial_to_native(lon, lat);
        let (px, py) = self.proj.s2x(phi, theta)?;
        let w = if self.lon_axis == 0 {
            [px, py]
        } else {
            [py, px]
        };
        let mut d0 = self.inv[0][0] * w[0] + self.inv[0][1] * w[1];
        let mut d1 = self.inv[1][0] * w[0] + self.inv[1][1] * w[1];
        if let Some(s) = &self.sip {
            (d0, d1) = s.inverse(d0, d1)?;
        }
        Some((d0 + self.crpix[0] - 1.0, d1 + self.crpix[1] - 1.0))
    }

    /// Native unit vector at projection-plane coordinates (degrees).
    fn native_vector(&self, px: f64, py: f64) -> Option<[f64; 3]> {
        let (phi, theta) = self.proj.x2s(px, py)?;
        let (sp, cp) = sincosd(phi);
        let (st, ct) = sincosd(theta);
        Some([ct * cp, ct * sp, st])
    }

    /// Derivatives of the native unit vector with respect to the two projection-plane
    /// coordinates (per degree), by the five-point central difference
    /// f' = (f(-2h) - 8 f(-h) + 8 f(h) - f(2h)) / (12 h), whose truncation error is
    /// O(h^4 f^(5)). With h = 1e-3 rad (0.0573 deg) that is ~1e-12 relative for any
    /// projection distortion on a scale of a radian, while round-off stays near 1e-13. Near
    /// the domain edge smaller steps are tried.
    fn plane_derivatives(&self, px: f64, py: f64) -> Option<([f64; 3], [f64; 3])> {
        let mut h = 1.0e-3 * R2D;
        for _ in 0..4 {
            let d = |dx: f64, dy: f64| -> Option<[f64; 3]> {
                let m2 = self.native_vector(px - 2.0 * dx, py - 2.0 * dy)?;
                let m1 = self.native_vector(px - dx, py - dy)?;
                let p1 = self.native_vector(px + dx, py + dy)?;
                let p2 = self.native_vector(px + 2.0 * dx, py + 2.0 * dy)?;
                let step = dx + dy;
                let mut out = [0.0; 3];
                for k in 0..3 {
                    out[k] = (m2[k] - 8.0 * m1[k] + 8.0 * p1[k] - p2[k]) / (12.0 * step);
                }
                Some(out)
            };
            if let (Some(a), Some(b)) = (d(h, 0.0), d(0.0, h)) {
                return Some((a, b));
            }
            h /= 16.0;
        }
        None
    }

    /// Derivatives of the unit vector on the sky with respect to pixel x and y.
    fn pixel_derivatives(&self, x: f64, y: f64) -> Option<([f64; 3], [f64; 3])> {
        if !x.is_finite() || !y.is_finite() {
            return None;
        }
        let (px, py) = self.plane(x, y);
        self.proj.x2s(px, py)?;
        let (nx, ny) = self.plane_derivatives(px, py)?;
        // d(plane x, plane y)/d(pixel x, pixel y): the matrix, after the SIP Jacobian if any.
        let m = match &self.sip {
            Some(s) => {
                let j = s.jacobian(x + 1.0 - self.crpix[0], y + 1.0 - self.crpix[1]);
                let l = &self.lin;
                [
                    [
                        l[0][0] * j[0][0] + l[0][1] * j[1][0],
                        l[0][0] * j[0][1] + l[0][1] * j[1][1],
                    ],
                    [
                        l[1][0] * j[0][0] + l[1][1] * j[1][0],
                        l[1][0] * j[0][1] + l[1][1] * j[1][1],
                    ],
                ]
            }
            None => self.lin,
        };
        let (l, b) = (self.lon_axis, 1 - self.lon_axis);
        let (dxdp, dxdq) = (m[l][0], m[l][1]);
        let (dydp, dydq) = (m[b][0], m[b][1]);
        let mut dp = [0.0; 3];
        let mut dq = [0.0; 3];
        for k in 0..3 {
            dp[k] = nx[k] * dxdp + ny[k] * dydp;
            dq[k] = nx[k] * dxdq + ny[k] * dydq;
        }
        Some((dp, dq))
    }

    /// Solid angle of one pixel at (x, y) in steradians: |d n/dx x d n/dy| for the unit vector
    /// n on the sky, i.e. |Jacobian of (lon, lat)| cos(lat) in radians, exact to ~1e-12
    /// relative (see the finite-difference note in the source). NaN outside the domain.
    pub fn pixel_solid_angle(&self, x: f64, y: f64) -> f64 {
        match self.pixel_derivatives(x, y) {
            Some((a, b)) => {
                let c = [
                    a[1] * b[2] - a[2] * b[1],
                    a[2] * b[0] - a[0] * b[2],
                    a[0] * b[1] - a[1] * b[0],
                ];
                (c[0] * c[0] + c[1] * c[1] + c[2] * c[2]).sqrt()
            }
            None => f64::NAN,
        }
    }

    /// Angular length in degrees of one pixel step along x and along y at (x, y). NaN outside
    /// the domain.
    pub fn pixel_scale(&self, x: f64, y: f64) -> (f64, f64) {
        match self.pixel_derivatives(x, y) {
            Some((a, b)) => {
                let n = |v: [f64; 3]| (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt() * R2D;
                (n(a), n(b))
            }
            None => (f64::NAN, f64::NAN),
        }
    }

    /// Whether pixel (x, y) lies on the sky with a pixel scale there: it has a sky position,
    /// and a finite, non-zero size along x and y.
    fn on_sky(&self, x: f64, y: f64) -> bool {
        if self.pixel_to_sky(x, y).is_none() {
            return false;
        }
        let (sx, sy) = self.pixel_scale(x, y);
        sx.is_finite() && sy.is_finite() && sx > 0.0 && sy > 0.0
    }

    /// The pixel at which the scales of a map of `nx` x `ny` pixels are taken (its pixel
    /// size and solid angle, and so the beam in pixels): the map centre ((nx - 1) / 2,
    /// (ny - 1) / 2) when it lies on the sky; else the reference pixel (CRPIX) when it lies
    /// on the map and on the sky (where most projections have their true scale); else the pixel
    /// centre of the map on the sky nearest the reference pixel (ties to the lower y, then
    /// the lower x). Maps whose centre lies outside the projection's domain (an all-sky AIT or
    /// HPX map with its reference point near an edge) take one of the last two. On maps up to
    /// 1024 pixels on a side every pixel is tried; on larger ones a grid of about 1024 x 1024
    /// pixels, then every pixel within one grid step of the grid's nearest. `None` when no
    /// pixel tried lies on the sky.
    pub fn scale_pixel(&self, nx: usize, ny: usize) -> Option<(f64, f64)> {
        let (cx, cy) = ((nx as f64 - 1.0) / 2.0, (ny as f64 - 1.0) / 2.0);
        if self.on_sky(cx, cy) {
            return Some((cx, cy));
        }
        let (rx, ry) = (self.crpix[0] - 1.0, self.crpix[1] - 1.0);
        let inside = |v: f64, n: usize| v >= -0.5 && v <= n as f64 - 0.5;
        if inside(rx, nx) && inside(ry, ny) && self.on_sky(rx, ry) {
            return Some((rx, ry));
        }
        let step = nx.max(ny).div_ceil(1024).max(1);
        // The pixel on the sky nearest the reference pixel among those of `xs` x `ys`.
        let nearest = |xs: &[usize], ys: &[usize]| {
            let mut best: Option<(f64, usize, usize)> = None;
            for &y in ys {
                for &x in xs {
                    let d = (x as f64 - rx).powi(2) + (y as f64 - ry).powi(2);
                    let better = match best {
                        None => true,
                        Some((bd, by, bx)) => d < bd || (d == bd && (y, x) < (by, bx)),
                    };
                    if better && self.on_sky(x as f64, y as f64) {
                        best = Some((d, y, x));
                    }
                }
            }
            best
        };
        let grid = |n: usize| -> Vec<usize> {
            let mut v: Vec<usize> = (0..n).step_by(step).collect();
            if v.last() != Some(&(n - 1)) {
                v.push(n - 1);
            }
            v
        };
        let (_, mut y, mut x) = nearest(&grid(nx), &grid(ny))?;
        if step > 1 {
            let near = |c: usize, n: usize| -> Vec<usize> {
                (c.saturating_sub(step)..=(c + step).min(n - 1)).collect()
            };
            (_, y, x) = nearest(&near(x, nx), &near(y, ny))?;
        }
        Some((x as f64, y as f64))
    }

    /// The reference pixel, zero-based (CRPIX1 - 1, CRPIX2 - 1).
    pub fn reference_pixel(&self) -> (f64, f64) {
        (self.crpix[0] - 1.0, self.crpix[1] - 1.0)
    }

    /// The celestial frame.
    pub fn frame(&self) -> &SkyFrame {
        &self.frame
    }

    /// The projection code, e.g. "TAN" (NCP is reported as "SIN", GLS as "SFL"); "linear"
    /// for axes without a projection code (CTYPE `RA` and `DEC`, ...), whose longitude and
    /// latitude are linear in the pixels.
    pub fn projection(&self) -> &str {
        if self.linear {
            "linear"
        } else {
            &self.proj.code
        }
    }

    /// Whether longitude and latitude are linear in the pixels (CTYPEs without a projection
    /// code, read as WCSLIB reads them).
    pub fn is_linear(&self) -> bool {
        self.linear
    }

    /// The distortion convention applied in pixel space ("SIP"), if any.
    pub fn distortion(&self) -> Option<&str> {
        self.sip.as_ref().map(|_| "SIP")
    }

    /// Which image axis (0 = x, 1 = y) carries longitude.
    pub fn lon_axis(&self) -> usize {
        self.lon_axis
    }

    /// Celestial coordinates of the native pole and LONPOLE (alpha_p, delta_p, phi_p), degrees.
    pub fn native_pole_angles(&self) -> (f64, f64, f64) {
        (self.alpha_p, self.delta_p, self.phi_p)
    }

    /// The WCS keywords of the two celestial axes, normalised (CD matrix in degrees, resolved
    /// LONPOLE and LATPOLE, NCP and GLS written as SIN and SFL with their parameters), to
    /// copy into a derived 2-D image so that it overlays exactly on the original.
    pub fn header_cards(&self) -> Vec<Card> {
        let card = |key: String, value: Value, comment: &str| Card {
            key,
            value: Some(value),
            comment: comment.to_string(),
        };
        let mut out = vec![card("WCSAXES".into(), Value::Int(2), "number of WCS axes")];
        for i in 0..2 {
            out.push(card(
                format!("CTYPE{}", i + 1),
                Value::Str(self.ctype[i].clone()),
                "",
            ));
        }
        for i in 0..2 {
            out.push(card(
                format!("CUNIT{}", i + 1),
                Value::Str("deg".into()),
                "",
            ));
        }
        for i in 0..2 {
            out.push(card(
                format!("CRPIX{}", i + 1),
                Value::Float(self.crpix[i]),
                "reference pixel (1-based)",
            ));
        }
        for i in 0..2 {
            out.push(card(
                format!("CRVAL{}", i + 1),
                Value::Float(self.crval[i]),
                "[deg] reference value",
            ));
        }
        for i in 0..2 {
            for j in 0..2 {
                out.push(card(
                    format!("CD{}_{}", i + 1, j + 1),
                    Value::Float(self.lin[i][j]),
                    "[deg/pixel]",
                ));
            }
        }
        let la = 2 - self.lon_axis;
        let lo = self.lon_axis + 1;
        // Linear axes take no projection parameters nor poles.
        let pv: &[Option<f64>] = if self.linear { &[] } else { &self.pv };
        for (m, v) in pv.iter().enumerate() {
            if let Some(v) = v {
                out.push(card(
                    format!("PV{la}_{m}"),
                    Value::Float(*v),
                    "projection parameter",
                ));
            }
        }
        if !self.linear {
            if self.proj.offset_applied {
                out.push(card(
                    format!("PV{lo}_0"),
                    Value::Float(1.0),
                    "fiducial point offset to (0, 0)",
                ));
            }
            out.push(card(
                format!("PV{lo}_1"),
                Value::Float(self.proj.phi0),
                "[deg] native longitude of fiducial point",
            ));
            out.push(card(
                format!("PV{lo}_2"),
                Value::Float(self.proj.theta0),
                "[deg] native latitude of fiducial point",
            ));
            out.push(card(
                "LONPOLE".into(),
                Value::Float(self.phi_p),
                "[deg] native longitude of celestial pole",
            ));
            out.push(card(
                "LATPOLE".into(),
                Value::Float(self.delta_p),
                "[deg] celestial latitude of native pole",
            ));
        }
        if let Some(s) = &self.sip {
            out.extend(s.cards());
        }
        match &self.frame {
            SkyFrame::Icrs => out.push(card("RADESYS".into(), Value::Str("ICRS".into()), "")),
            SkyFrame::Fk5 { equinox } => {
                out.push(card("RADESYS".into(), Value::Str("FK5".into()), ""));
                out.push(card("EQUINOX".into(), Value::Float(*equinox), ""));
            }
            SkyFrame::Fk4 { equinox } => {
                out.push(card("RADESYS".into(), Value::Str("FK4".into()), ""));
                out.push(card("EQUINOX".into(), Value::Float(*equinox), ""));
            }
            _ => {
                if let Some(r) = &self.radesys {
                    out.push(card("RADESYS".into(), Value::Str(r.clone()), ""));
                }
                if let Some(e) = self.equinox {
                    out.push(card("EQUINOX".into(), Value::Float(e), ""));
                }
            }
        }
        out
    }
}

/// Whether `coord` (upper case, without hyphens) names a celestial coordinate: `RA`, `DEC`,
/// or a pair's `xLON`/`xLAT` or `xyLN`/`xyLT` (Paper II sec. 3.1).
fn is_sky_coordinate(coord: &str) -> bool {
    matches!(coord, "RA" | "DEC")
        || (coord.len() == 4
            && (coord.ends_with("LON")
                || coord.ends_with("LAT")
                || coord.ends_with("LN")
                || coord.ends_with("LT")))
}

/// Why the first two axes of a header that [`Wcs::from_header`] reads as not celestial may
/// still have been meant as the sky: a CTYPE that names a sky coordinate but no projection
/// code after its hyphens (`RA---`), or one not in the standard form of four characters for
/// the coordinate, padded with hyphens, then the projection code (`RA--TAN`). A sentence with
/// the fix, or `None` when the CTYPEs name no sky coordinate.
pub fn why_not_celestial(h: &Header) -> Option<String> {
    for i in 1..=2 {
        let key = format!("CTYPE{i}");
        let Some(orig) = h.get_str(&key) else {
            continue;
        };
        let t = orig.trim().to_ascii_uppercase();
        let Some((coord, rest)) = t.split_once('-') else {
            continue;
        };
        if !is_sky_coordinate(coord) {
            continue;
        }
        let what = if rest.trim_start_matches('-').trim().is_empty() {
            "names a sky coordinate but no projection code after its hyphens"
        } else {
            "names a sky coordinate but is not in the standard form (the coordinate padded with hyphens to four characters, then the projection code)"
        };
        return Some(format!(
            "{key} = '{}' {what}, so the map has no celestial WCS and is read in pixels; set CTYPE1 and CTYPE2 to the map's projection, such as 'RA---TAN' and 'DEC--TAN' or 'GLON-CAR' and 'GLAT-CAR' (or 'RA' and 'DEC' for longitude and latitude linear in the pixels)",
            orig.trim()
        ));
    }
    None
}

/// Whether `key` is one of the keywords of a celestial WCS (FITS WCS Papers I and II, and
/// SIP's A_, B_, AP_, BP_ coefficients).
pub(crate) fn is_wcs_key(key: &str) -> bool {
    const EXACT: [&str; 7] = [
        "LONPOLE", "LATPOLE", "RADESYS", "RADECSYS", "EQUINOX", "EPOCH", "WCSAXES",
    ];
    const PREFIX: [&str; 13] = [
        "CTYPE", "CRPIX", "CRVAL", "CDELT", "CUNIT", "CROTA", "CD", "PC", "PV", "A_", "B_", "AP_",
        "BP_",
    ];
    EXACT.contains(&key)
        || PREFIX.iter().any(|p| {
            key.strip_prefix(p).is_some_and(|r| {
                r.bytes().next().is_some_and(|b| b.is_ascii_digit()) || p.ends_with('_')
            })
        })
}

/// Whether the header has a PCi_j card of any axes (as WCSLIB, which then reads a PC
/// matrix and not CROTAi).
pub(crate) fn any_pc_card(h: &Header) -> bool {
    h.cards().iter().any(|c| {
        c.value.is_some()
            && c.key.strip_prefix("PC").is_some_and(|r| {
                r.split_once('_').is_some_and(|(i, j)| {
                    !i.is_empty()
                        && !j.is_empty()
                        && i.bytes().all(|b| b.is_ascii_digit())
                        && j.bytes().all(|b| b.is_ascii_digit())
                })
            })
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A header from card texts (each padded to 80 characters).
    pub(super) fn header(cards: &[&str]) -> Header {
        Header::parse(&cards.iter().map(|c| format!("{c:<80}")).collect::<String>())
    }

    #[test]
    fn unknown_projection_is_named() {
        let h = header(&[
            "CTYPE1  = 'RA---XYZ'",
            "CTYPE2  = 'DEC--XYZ'",
            "CDELT1  = -0.01",
            "CDELT2  = 0.01",
        ]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert!(
            e.starts_with("unknown projection code 'XYZ' in CTYPE1 = 'RA---XYZ' (cairn reads AZP,"),
            "{e}"
        );
    }

    /// Distortions other than SIP are named, and SIP without its polynomials is refused; a SIP
    /// map's header cards keep the suffix and the polynomials.
    #[test]
    fn distortion_suffixes() {
        let base = ["CDELT1  = -0.01", "CDELT2  = 0.01"];
        let with = |c1: &str, c2: &str, more: &[&str]| {
            let mut cards: Vec<String> =
                vec![format!("CTYPE1  = '{c1}'"), format!("CTYPE2  = '{c2}'")];
            cards.extend(base.iter().chain(more).map(|s| s.to_string()));
            let refs: Vec<&str> = cards.iter().map(String::as_str).collect();
            Wcs::from_header(&header(&refs))
        };
        let e = with("RA---TAN-TPV", "DEC--TAN-TPV", &[])
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("names the distortion 'TPV'") && e.contains("reads SIP"),
            "{e}"
        );
        // TPV (and TNX) as the projection code itself, as most headers write it.
        for code in ["TPV", "TNX"] {
            let e = with(&format!("RA---{code}"), &format!("DEC--{code}"), &[])
                .unwrap_err()
                .to_string();
            assert!(
                e.contains(&format!("names the {code} distortion convention"))
                    && e.contains("reads SIP"),
                "{e}"
            );
        }
        // TAN with the polynomial cards of TPV (PV1_5 and on), as astropy 8.0.2's WCS reads
        // such a header (as TPV): refused, not read as TAN.
        for cards in [
            &["PV1_5   = 0.002"][..],
            &["PV2_1   = 1.0", "PV2_10  = 1e-4"][..],
        ] {
            let e = with("RA---TAN", "DEC--TAN", cards).unwrap_err().to_string();
            assert!(
                e.contains("TPV convention") && e.contains("reads SIP"),
                "{e}"
            );
        }
        // PVi_0 to PVi_4 are TAN's own (a fiducial point and pole), read as such.
        assert!(with("RA---TAN", "DEC--TAN", &["PV1_1   = 0.0", "PV1_4   = 90.0"]).is_ok());
        let e = with("RA---TAN-SIP", "DEC--TAN-SIP", &[])
            .unwrap_err()
            .to_string();
        assert!(e.contains("A_ORDER is missing"), "{e}");
        let w = with(
            "RA---TAN-SIP",
            "DEC--TAN-SIP",
            &["A_ORDER = 2", "A_2_0   = 1E-5", "B_ORDER = 2"],
        )
        .unwrap()
        .unwrap();
        assert_eq!(w.distortion(), Some("SIP"));
        let cards = w.header_cards();
        let get = |k: &str| {
            cards
                .iter()
                .find(|c| c.key == k)
                .and_then(|c| c.value.clone())
        };
        assert_eq!(get("CTYPE1"), Some(Value::Str("RA---TAN-SIP".into())));
        assert_eq!(get("A_2_0"), Some(Value::Float(1e-5)));
        assert_eq!(get("B_ORDER"), Some(Value::Int(2)));
    }

    #[test]
    fn singular_matrix_is_rejected() {
        let h = header(&[
            "CTYPE1  = 'RA---TAN'",
            "CTYPE2  = 'DEC--TAN'",
            "CD1_1   = -0.01",
            "CD1_2   = 0.02",
            "CD2_1   = 0.005",
            "CD2_2   = -0.01",
        ]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert_eq!(
            e,
            "the pixel-to-sky matrix of axes 1 and 2 (from CDi_j) is singular: its determinant is zero"
        );
        let h = header(&[
            "CTYPE1  = 'GLON-CAR'",
            "CTYPE2  = 'GLAT-CAR'",
            "CDELT1  = 0.0",
            "CDELT2  = 0.01",
        ]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert!(e.contains("(from CDELTi) is singular"), "{e}");
    }

    #[test]
    fn non_celestial_axes_give_none() {
        for cards in [
            vec!["CTYPE1  = 'X'", "CTYPE2  = 'Y'"],
            vec!["CTYPE1  = 'LINEAR'", "CTYPE2  = 'LINEAR'"],
            vec!["NAXIS   = 2"],
            vec![
                "CTYPE1  = 'FREQ'",
                "CTYPE2  = 'STOKES'",
                "CTYPE3  = 'RA---TAN'",
                "CTYPE4  = 'DEC--TAN'",
            ],
        ] {
            assert!(
                Wcs::from_header(&header(&cards)).unwrap().is_none(),
                "{cards:?}"
            );
        }
    }

    #[test]
    fn mismatched_axes_are_errors() {
        let h = header(&["CTYPE1  = 'RA---TAN'", "CTYPE2  = 'FREQ'"]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert_eq!(
            e,
            "CTYPE1 = 'RA---TAN' is celestial but CTYPE2 = 'FREQ' is not its matching longitude or latitude axis"
        );
        let h = header(&["CTYPE1  = 'RA---TAN'", "CTYPE2  = 'GLAT-TAN'"]);
        assert!(
            Wcs::from_header(&h)
                .unwrap_err()
                .to_string()
                .contains("not a longitude/latitude pair")
        );
    }

    /// CTYPEs that name sky coordinates without a usable projection code: bare names are read
    /// as linear axes (as WCSLIB reads them; their positions are checked against astropy in
    /// tests/wcs_astropy.rs) and written back as such, without projection parameters or poles;
    /// hyphens without a code, or a code out of place, give no WCS and a sentence saying why
    /// and what to set; a bare name beside a projected axis is refused, naming both.
    #[test]
    fn ctypes_without_a_projection_code() {
        let base = ["CDELT1  = -0.01", "CDELT2  = 0.01", "CRVAL2  = 30.0"];
        let with = |c1: &str, c2: &str| {
            let mut cards = vec![format!("CTYPE1  = '{c1}'"), format!("CTYPE2  = '{c2}'")];
            cards.extend(base.iter().map(|s| s.to_string()));
            let refs: Vec<&str> = cards.iter().map(String::as_str).collect();
            header(&refs)
        };
        let w = Wcs::from_header(&with("GLON", "GLAT")).unwrap().unwrap();
        assert!(w.is_linear() && w.projection() == "linear");
        let cards = w.header_cards();
        let keys: Vec<&str> = cards.iter().map(|c| c.key.as_str()).collect();
        assert!(
            !keys
                .iter()
                .any(|k| k.starts_with("PV") || k.ends_with("POLE")),
            "{keys:?}"
        );
        let ctype1 = cards.iter().find(|c| c.key == "CTYPE1").unwrap();
        assert_eq!(ctype1.value, Some(Value::Str("GLON".into())));
        for (c1, c2, says) in [
            (
                "RA---",
                "DEC--",
                "CTYPE1 = 'RA---' names a sky coordinate but no projection code",
            ),
            (
                "RA--TAN",
                "DEC-TAN",
                "CTYPE1 = 'RA--TAN' names a sky coordinate but is not in the standard form",
            ),
        ] {
            let h = with(c1, c2);
            assert!(Wcs::from_header(&h).unwrap().is_none(), "{c1}");
            let why = why_not_celestial(&h).unwrap();
            assert!(
                why.starts_with(says) && why.contains("such as 'RA---TAN' and 'DEC--TAN'"),
                "{why}"
            );
        }
        assert!(why_not_celestial(&with("FREQ", "STOKES")).is_none());
        // A bare name beside an axis that is not its partner: no celestial pair, as astropy
        // 8.0.2's WCS reads these (has_celestial False; tests/header_reference.rs checks
        // them against it), so the map loads in pixel units.
        for (c1, c2) in [("RA", "VRAD"), ("LINEAR", "GLAT"), ("RA", "RA")] {
            assert!(
                Wcs::from_header(&with(c1, c2)).unwrap().is_none(),
                "{c1} {c2}"
            );
        }
        // A projected axis beside one that is not celestial is still refused.
        assert!(Wcs::from_header(&with("RA---TAN", "VRAD")).is_err());
        let e = Wcs::from_header(&with("RA", "DEC--TAN"))
            .unwrap_err()
            .to_string();
        assert_eq!(
            e,
            "CTYPE1 = 'RA' has no projection code but CTYPE2 = 'DEC--TAN' has one; give both axes the same code"
        );
    }

    /// A lower-case CTYPE is read as its upper-case spelling (the same sky) and written in
    /// upper case, the spelling WCSLIB reads (astropy 8.0.2 refuses the lower case:
    /// tests/header_reference.rs checks both against it).
    #[test]
    fn lower_case_ctypes_are_written_in_upper_case() {
        let cards = |c1: &str, c2: &str| {
            header(&[
                &format!("CTYPE1  = '{c1}'"),
                &format!("CTYPE2  = '{c2}'"),
                "CDELT1  = -0.01",
                "CDELT2  = 0.01",
                "CRVAL1  = 83.0",
                "CRVAL2  = -5.0",
                "A_ORDER = 2",
                "B_ORDER = 2",
            ])
        };
        for (lower, upper) in [
            (["ra---tan", "dec--tan"], ["RA---TAN", "DEC--TAN"]),
            (["glon-car", "Glat-Car"], ["GLON-CAR", "GLAT-CAR"]),
            (
                ["ra---tan-sip", "dec--tan-sip"],
                ["RA---TAN-SIP", "DEC--TAN-SIP"],
            ),
        ] {
            let w = Wcs::from_header(&cards(lower[0], lower[1]))
                .unwrap()
                .unwrap();
            let u = Wcs::from_header(&cards(upper[0], upper[1]))
                .unwrap()
                .unwrap();
            assert_eq!(w.pixel_to_sky(3.0, -7.0), u.pixel_to_sky(3.0, -7.0));
            let hc = w.header_cards();
            for (i, want) in upper.iter().enumerate() {
                let c = hc
                    .iter()
                    .find(|c| c.key == format!("CTYPE{}", i + 1))
                    .unwrap();
                assert_eq!(c.value, Some(Value::Str(want.to_string())), "{lower:?}");
            }
        }
    }

    /// The pixel where a map's scales are taken: the centre when on the sky; else the
    /// reference pixel when on the map; else the pixel on the sky nearest it, on a map larger
    /// than 1024 pixels too (there found on a grid, then refined). A property of the rule
    /// (its values against astropy are in tests/wcs_astropy.rs).
    #[test]
    fn scale_pixel_rule() {
        let ait = |crpix1: f64, n: usize, cdelt: f64| {
            header(&[
                "CTYPE1  = 'GLON-AIT'",
                "CTYPE2  = 'GLAT-AIT'",
                &format!("CRPIX1  = {crpix1}"),
                &format!("CRPIX2  = {}", n as f64 / 2.0 + 0.5),
                &format!("CDELT1  = {}", -cdelt),
                &format!("CDELT2  = {cdelt}"),
            ])
        };
        // Centre on the sky.
        let w = Wcs::from_header(&ait(100.5, 200, 1.2)).unwrap().unwrap();
        assert_eq!(w.scale_pixel(200, 200), Some((99.5, 99.5)));
        // Centre off the sky, reference pixel on the map.
        let w = Wcs::from_header(&ait(10.5, 200, 2.0)).unwrap().unwrap();
        assert!(w.pixel_to_sky(99.5, 99.5).is_none());
        assert_eq!(w.scale_pixel(200, 200), Some((9.5, 99.5)));
        // Reference pixel off the map: the nearest pixel on the sky, checked against every
        // pixel by brute force; and on a map of 3000 pixels a side the same pixel (there
        // found on a grid of 3-pixel steps, then refined).
        for (n, cdelt) in [(200usize, 1.2), (3000, 0.08)] {
            let w = Wcs::from_header(&ait(-(n as f64) * 0.3, n, cdelt))
                .unwrap()
                .unwrap();
            let (rx, ry) = w.reference_pixel();
            let got = w.scale_pixel(n, n).unwrap();
            assert!(w.pixel_to_sky(got.0, got.1).is_some());
            let d = |x: f64, y: f64| (x - rx).powi(2) + (y - ry).powi(2);
            // Every pixel of the rows and columns near the reference pixel's nearest.
            let best = (0..n)
                .flat_map(|y| (0..n.min(60)).map(move |x| (x as f64, y as f64)))
                .filter(|&(x, y)| w.pixel_to_sky(x, y).is_some())
                .min_by(|a, b| d(a.0, a.1).total_cmp(&d(b.0, b.1)))
                .unwrap();
            assert_eq!(
                d(got.0, got.1),
                d(best.0, best.1),
                "n = {n}: {got:?} {best:?}"
            );
        }
        // No pixel on the sky.
        let w = Wcs::from_header(&ait(-1000.0, 50, 1.2)).unwrap().unwrap();
        assert_eq!(w.scale_pixel(50, 50), None);
    }

    #[test]
    fn frame_defaults_follow_paper_ii() {
        let frame = |extra: &[&str]| {
            let mut cards = vec![
                "CTYPE1  = 'RA---TAN'",
                "CTYPE2  = 'DEC--TAN'",
                "CDELT1  = -0.01",
                "CDELT2  = 0.01",
            ];
            cards.extend_from_slice(extra);
            Wcs::from_header(&header(&cards))
                .unwrap()
                .unwrap()
                .frame()
                .clone()
        };
        assert_eq!(frame(&[]), SkyFrame::Icrs);
        assert_eq!(
            frame(&["EQUINOX = 2000.0"]),
            SkyFrame::Fk5 { equinox: 2000.0 }
        );
        assert_eq!(
            frame(&["EQUINOX = 1950.0"]),
            SkyFrame::Fk4 { equinox: 1950.0 }
        );
        assert_eq!(
            frame(&["RADESYS = 'FK5'"]),
            SkyFrame::Fk5 { equinox: 2000.0 }
        );
        assert_eq!(
            frame(&["RADECSYS= 'FK4'"]),
            SkyFrame::Fk4 { equinox: 1950.0 }
        );
    }

    #[test]
    fn other_header_problems_are_sentences() {
        // No native pole exists for this LONPOLE (Paper II eq. 8 has no real solution).
        let h = header(&[
            "CTYPE1  = 'GLON-CAR'",
            "CTYPE2  = 'GLAT-CAR'",
            "CRVAL2  = 35.0",
            "CDELT1  = -0.5",
            "CDELT2  = 0.5",
            "LONPOLE = 170.0",
        ]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert_eq!(
            e,
            "no valid celestial latitude of the native pole exists (CRVAL1 = 0, CRVAL2 = 35, LONPOLE = 170)"
        );
        let h = header(&[
            "CTYPE1  = 'RA---NCP'",
            "CTYPE2  = 'DEC--NCP'",
            "CDELT1  = -0.5",
            "CDELT2  = 0.5",
        ]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert_eq!(
            e,
            "NCP projection in CTYPE1 = 'RA---NCP' needs a reference latitude CRVAL2 away from 0"
        );
        let h = header(&[
            "CTYPE1  = 'RA---TAN'",
            "CTYPE2  = 'DEC--TAN'",
            "CUNIT1  = 'furlong'",
        ]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert_eq!(
            e,
            "unknown angular unit in CUNIT1 = 'furlong' (cairn reads deg (or degree, degrees), arcmin, arcsec, mas, rad)"
        );
        let h = header(&["CTYPE1  = 'RA---COP'", "CTYPE2  = 'DEC--COP'"]);
        let e = Wcs::from_header(&h).unwrap_err().to_string();
        assert_eq!(
            e,
            "projection COP needs parameter PVi_1 on the latitude axis (CTYPE1 = 'RA---COP')"
        );
    }

    #[test]
    fn unit_scale_at_the_reference_point() {
        // Paper II sec. 5.1.3: TAN has R = r0 cot(theta), true scale at the reference point, so
        // one pixel there spans |CDELT| and covers |CDELT1 CDELT2| (in radians^2).
        let h = header(&[
            "CTYPE1  = 'RA---TAN'",
            "CTYPE2  = 'DEC--TAN'",
            "CRPIX1  = 51.0",
            "CRPIX2  = 41.0",
            "CRVAL1  = 150.0",
            "CRVAL2  = -60.0",
            "CDELT1  = -0.002",
            "CDELT2  = 0.003",
        ]);
        let w = Wcs::from_header(&h).unwrap().unwrap();
        let (sx, sy) = w.pixel_scale(50.0, 40.0);
        assert!(
            (sx - 0.002).abs() < 1e-14 && (sy - 0.003).abs() < 1e-14,
            "{sx} {sy}"
        );
        let omega = w.pixel_solid_angle(50.0, 40.0);
        let expected = (0.002f64).to_radians() * (0.003f64).to_radians();
        assert!((omega / expected - 1.0).abs() < 1e-11, "{omega} {expected}");
        // TAN maps a plane point at distance r (radians) to a sky area element of
        // (1 + r^2)^(-3/2) times the plane's (from R = r0 cot(theta)).
        let r = (1950.0f64 * 0.002).to_radians();
        let far = w.pixel_solid_angle(2000.0, 40.0);
        let expected = omega * (1.0 + r * r).powf(-1.5);
        assert!((far / expected - 1.0).abs() < 1e-10, "{far} {expected}");
    }

    #[test]
    fn reference_pixel_maps_to_reference_value() {
        // Paper I: the reference pixel (FITS CRPIX, zero-based CRPIX - 1) is at CRVAL.
        let h = header(&[
            "CTYPE1  = 'DEC--ZEA'",
            "CTYPE2  = 'RA---ZEA'",
            "CRPIX1  = 10.0",
            "CRPIX2  = 20.0",
            "CRVAL1  = -31.5",
            "CRVAL2  = 201.25",
            "CDELT1  = 0.01",
            "CDELT2  = -0.01",
        ]);
        let w = Wcs::from_header(&h).unwrap().unwrap();
        let (lon, lat) = w.pixel_to_sky(9.0, 19.0).unwrap();
        assert!(
            (lon - 201.25).abs() < 1e-12 && (lat + 31.5).abs() < 1e-12,
            "{lon} {lat}"
        );
    }
}
