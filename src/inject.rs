//! Injection of synthetic cores of known mass into a real map, for completeness tests
//! (`cairn synth --into MAP`).
//!
//! Owns the placement of the cores on the map, their beam convolution and their conversion
//! to the map's unit; the cores themselves are those of [`crate::synth`] (the same random
//! population, profiles and normalisation), the conversion that of [`crate::score::Converter`].
//!
//! * Masses and radii are drawn as `synth` draws its random population (same seed, same
//!   stream). Each core's first position is the one `synth` would draw; a position is kept
//!   when the pixels within the core's reach are all valid (not missing) and it lies at
//!   least the minimum separation from
//!   every core placed before it; otherwise further positions come from a stream of their own,
//!   up to [`TRIES_PER_CORE`] per core. The default separation is twice the width of the
//!   widest core as observed (twice its radius, the FWHM of a Gaussian core or the diameter of
//!   a Bonnor-Ebert one, and the beam's major axis in quadrature), so that each core is
//!   isolated: at least two beam FWHMs, more for cores larger than the beam. A core's reach
//!   is four standard deviations of the core convolved with the beam (a Bonnor-Ebert core: its
//!   outer radius and four of the beam's), which holds all but 3e-4 of a Gaussian core's
//!   mass, so the mass added to the map is the mass the truth records, next to missing
//!   pixels too. Positions keep [`MIN_MARGIN_PX`] pixels, two beam FWHMs or the widest
//!   core's reach, whichever is most, from every edge.
//! * Each core's H2 column density is rendered exactly as `synth` renders it, with square
//!   pixels of the map's solid angle at the core (the mass is exact on the grid:
//!   sum N(H2) Omega_pix d^2 mu_H2 m_H = M, which is how `segment` measures masses).
//! * Beam: the cores (not the map, which has its beam already) are convolved with the map's
//!   Gaussian beam, carried to pixel axes through the local Jacobian of the projection at the
//!   core; the convolution is linear (zero-padded, by FFT on a grid large enough that nothing
//!   wraps), since a real map is not periodic. The kernel is sampled out to seven standard
//!   deviations and normalised to unit sum, so each core keeps its mass.
//! * Units: N(H2) is divided by the factor of [`crate::score::Converter`] at each pixel, the
//!   same factor `segment` multiplies by: cm^-2 as it is, extinction through N(H2)/A_V
//!   (Bohlin, Savage & Drake 1978) and A_V/A_K (Rieke & Lebofsky 1985), emission through the
//!   optically thin Planck law at the dust temperature (Hildebrand 1983) and the opacity law.
//!
//! Determinism: every random number comes from ChaCha8 streams seeded by the seed; cores are
//! rendered in parallel but added to the map in their order, so the result is byte-identical
//! whatever the number of threads.

use ndarray::Array2;
use rayon::prelude::*;
use rustfft::FftPlanner;
use rustfft::num_complex::Complex;
use serde::Serialize;

use crate::error::{Error, Result};
use crate::header::{Card, Header, Value};
use crate::map::Map;
use crate::physics::constants::ARCSEC;
use crate::score::{Context, Converter};
use crate::synth::{self, CorePopulation, SynthSpec, TruthCore};

/// Least distance \[pixels\] kept between a core's position and the map edges.
pub const MIN_MARGIN_PX: f64 = 10.0;
/// Positions tried per core before the placement is given up.
pub const TRIES_PER_CORE: usize = 10_000;
/// Most cores one injection may place.
pub const MAX_CORES: usize = 100_000;
/// Random stream of the further positions (synth's streams are 1 to 3 << 32).
const STREAM_PLACEMENT: u64 = 4 << 32;
/// Beam kernel half width in standard deviations.
const KERNEL_SIGMAS: f64 = 7.0;

/// What to inject.
#[derive(Debug, Clone, Serialize)]
pub struct InjectOptions {
    /// The random population (its `margin_px` is replaced by the margin chosen here).
    pub population: CorePopulation,
    /// Distance \[pc\].
    pub distance_pc: f64,
    /// Seed of every random stream.
    pub seed: u64,
    /// Least distance between two injected cores \[arcsec\]; `None`: twice the width of the
    /// widest core as observed (twice its radius and the beam's major axis in quadrature).
    pub min_separation_arcsec: Option<f64>,
}

/// The map with its injected cores.
#[derive(Debug, Clone)]
pub struct Injected {
    /// The pixels: the map's plus the cores'.
    pub data: Array2<f32>,
    /// The input's header with HISTORY cards saying what was injected.
    pub header: Header,
    /// The injected cores, with positions in the map's pixels and sky frame.
    pub truth: Vec<TruthCore>,
    /// For each core, the sum over the map of its contribution, in map units times pixels
    /// (computed in double precision, before it is added to the map).
    pub core_sums: Vec<f64>,
    /// The minimum separation used \[arcsec\].
    pub min_separation_arcsec: f64,
    /// The margin kept from the edges \[pixels\].
    pub margin_px: f64,
}

/// The side of the tiles in which the injected light is summed (see [`add_cores`]).
const TILE: usize = 64;

/// A row's values starting at column `x0`, cut where they cross from one tile into the next.
fn split_at_tiles(vals: &[f64], x0: usize) -> impl Iterator<Item = &[f64]> {
    let mut rest = vals;
    let mut x = x0;
    std::iter::from_fn(move || {
        if rest.is_empty() {
            return None;
        }
        let n = (TILE - x % TILE).min(rest.len());
        let (run, tail) = rest.split_at(n);
        rest = tail;
        x += n;
        Some(run)
    })
}

/// A core convolved with the beam, in map units, on a box of the map.
struct Patch {
    x0: usize,
    y0: usize,
    w: usize,
    values: Vec<f64>,
}

fn cannot(map: &Map, problem: &str) -> Error {
    Error::input(&map.path, problem)
}

/// Injects the cores of `opts` into `map`, converted to its unit with `ctx`.
///
/// On success the map's pixels have been moved into [`Injected::data`] (`map.data` is left
/// empty, 0 x 0), so that the injection needs the map's bytes once rather than twice; on an
/// error `map` is as it was.
///
/// Refuses, in one sentence naming the file and the fix: a map without a celestial WCS (no
/// pixel scale) or without a beam; a unit that cannot be converted from column density; cores
/// that cannot all be placed.
pub fn inject(map: &mut Map, ctx: &Context, opts: &InjectOptions) -> Result<Injected> {
    let (wcs, beam, conv) = prerequisites(map, ctx)?;
    if !(opts.distance_pc > 0.0 && opts.distance_pc.is_finite()) {
        return Err(Error::usage(
            "injecting cores of known mass needs the distance: give --distance, such as 300pc.",
        ));
    }
    if !map.data.iter().any(|v| v.is_finite()) {
        return Err(cannot(
            map,
            "has no valid pixel (every pixel is NaN, BLANK or infinite), so no core can be placed on it; check that this is the right HDU (--hdu) or plane (--plane), or give a map with data.",
        ));
    }
    let (nx, ny) = (map.nx(), map.ny());
    let (cx, cy) = ((nx as f64 - 1.0) / 2.0, (ny as f64 - 1.0) / 2.0);
    let (sx, sy) = wcs.pixel_scale(cx, cy);
    let pix_arcsec = (sx * sy).sqrt() * 3600.0;
    if !(pix_arcsec.is_finite() && pix_arcsec > 0.0) {
        return Err(cannot(
            map,
            "has a WCS whose pixel size cannot be measured at the map centre, so cores of known mass cannot be injected; give a map whose centre lies on the sky.",
        ));
    }
    let fwhm_major_px = beam.major_deg * 3600.0 / pix_arcsec;
    // The widest core as observed: its width (twice the radius: the FWHM of a Gaussian core,
    // the diameter of a Bonnor-Ebert one) and the beam's major axis added in quadrature.
    let widest_arcsec = (2.0 * opts.population.radius_max_pc / opts.distance_pc / ARCSEC)
        .hypot(beam.major_deg * 3600.0);
    let separation_arcsec = opts.min_separation_arcsec.unwrap_or(2.0 * widest_arcsec);
    let sep_px = separation_arcsec / pix_arcsec;
    // How far a core's mass reaches on the map, in pixels: four standard deviations of a
    // Gaussian core convolved with the beam (all but 3e-4 of its mass), or a Bonnor-Ebert
    // core's outer radius plus four of the beam's. Cores are placed so that this disc lies on
    // the map and on valid pixels, so the mass added is the mass recorded.
    let sigma_beam_px = fwhm_major_px / (8.0 * std::f64::consts::LN_2).sqrt();
    let reach_px = |radius_pc: f64, profile: synth::Profile| -> f64 {
        let r_px = radius_pc / opts.distance_pc / ARCSEC / pix_arcsec;
        synth::reach_px(r_px, profile, sigma_beam_px)
    };
    let margin = MIN_MARGIN_PX
        .max(2.0 * fwhm_major_px)
        .max(reach_px(
            opts.population.radius_max_pc,
            opts.population.profile,
        ))
        .ceil();
    let p = &opts.population;
    if p.count == 0 || p.count > MAX_CORES {
        return Err(Error::usage(format!(
            "--cores {} is not a number of cores that can be injected; give between 1 and {MAX_CORES}.",
            p.count
        )));
    }
    if !(2.0 * margin < nx as f64 - 1.0 && 2.0 * margin < ny as f64 - 1.0) {
        return Err(cannot(
            map,
            &format!(
                "is {nx} x {ny} pixels, too small to hold cores {margin} pixels (at least two beam FWHMs, {MIN_MARGIN_PX} pixels and the widest core's reach) from every edge; give a larger map or a smaller --core-radius."
            ),
        ));
    }
    let mut population = *p;
    population.margin_px = margin;
    let base = SynthSpec {
        nx,
        ny,
        pixel_arcsec: pix_arcsec,
        distance_pc: opts.distance_pc,
        beam_fwhm_arcsec: 0.0,
        background: None,
        cores: Vec::new(),
        population: Some(population),
        noise_rms: 0.0,
        seed: opts.seed,
        mu_h2: ctx.mu_h2,
        ..SynthSpec::default()
    };
    synth::check(&base)
        .map_err(|e| Error::usage(format!("cannot inject these cores: {}.", e.0)))?;
    let mut cores = synth::all_cores(&base);

    // Placement.
    let valid = |x: f64, y: f64, valid_radius: f64| -> bool {
        let r = valid_radius.ceil() as i64;
        let (xi, yi) = (x.round() as i64, y.round() as i64);
        for dy in -r..=r {
            for dx in -r..=r {
                if ((dx * dx + dy * dy) as f64) > valid_radius * valid_radius {
                    continue;
                }
                let (xx, yy) = (xi + dx, yi + dy);
                if xx < 0 || yy < 0 || xx >= nx as i64 || yy >= ny as i64 {
                    return false;
                }
                if !map.data[(yy as usize, xx as usize)].is_finite() {
                    return false;
                }
            }
        }
        true
    };
    // One decimal for everyday values, four significant digits for extreme ones.
    let short = |v: f64| {
        if (0.1..1e6).contains(&v) {
            format!("{v:.1}")
        } else {
            format!("{v:.3e}")
        }
    };
    let mut r = synth::rng(opts.seed, STREAM_PLACEMENT);
    let mut placed = Placed::new(nx, ny, sep_px, cores.len());
    let (w_in, h_in) = (
        nx as f64 - 1.0 - 2.0 * margin,
        ny as f64 - 1.0 - 2.0 * margin,
    );
    for (i, c) in cores.iter_mut().enumerate() {
        let reach = reach_px(c.radius_pc, c.profile);
        let mut ok = valid(c.x, c.y, reach) && placed.far(c.x, c.y);
        let mut tries = 0;
        while !ok && tries < TRIES_PER_CORE {
            use rand::RngExt;
            let (fx, fy): (f64, f64) = (r.random(), r.random());
            c.x = margin + fx * w_in;
            c.y = margin + fy * h_in;
            ok = valid(c.x, c.y, reach) && placed.far(c.x, c.y);
            tries += 1;
        }
        if !ok {
            return Err(cannot(
                map,
                &format!(
                    "has room for only {i} of the {} cores at least {} arcsec ({} pixels) apart on valid pixels {margin} pixels from the edges; give fewer --cores, a smaller --core-radius or a smaller --min-separation.",
                    p.count,
                    short(separation_arcsec),
                    short(sep_px)
                ),
            ));
        }
        placed.push(c.x, c.y);
    }

    let (layer, truth, core_sums) = add_cores(map, &conv, &base, &cores)?;
    let data = add_layer(map, layer)?;
    let header = injected_header(map, opts, &population, separation_arcsec, truth.len());
    Ok(Injected {
        data,
        header,
        truth,
        core_sums,
        min_separation_arcsec: separation_arcsec,
        margin_px: margin,
    })
}

/// The positions placed so far, in square cells at least the separation wide, so that the
/// test of a new position reads the placed positions of its own and the eight neighbouring
/// cells only (the same answer as testing every placed position, in time independent of
/// their number).
struct Placed {
    sep: f64,
    cell: f64,
    ncx: usize,
    ncy: usize,
    cells: Vec<Vec<(f64, f64)>>,
}

impl Placed {
    fn new(nx: usize, ny: usize, sep: f64, expected: usize) -> Placed {
        // Cells no narrower than the separation, and no more of them than four per core.
        let area = (nx as f64) * (ny as f64);
        let cell = sep
            .max((area / (4.0 * expected.max(1) as f64)).sqrt())
            .max(1.0);
        let ncx = ((nx as f64 / cell).ceil() as usize).max(1);
        let ncy = ((ny as f64 / cell).ceil() as usize).max(1);
        Placed {
            sep,
            cell,
            ncx,
            ncy,
            cells: vec![Vec::new(); ncx * ncy],
        }
    }

    fn index(&self, x: f64, y: f64) -> (usize, usize) {
        let c = |v: f64, n: usize| ((v / self.cell).floor().max(0.0) as usize).min(n - 1);
        (c(x, self.ncx), c(y, self.ncy))
    }

    /// Whether (x, y) lies at least the separation from every placed position.
    fn far(&self, x: f64, y: f64) -> bool {
        let (i, j) = self.index(x, y);
        for cj in j.saturating_sub(1)..=(j + 1).min(self.ncy - 1) {
            for ci in i.saturating_sub(1)..=(i + 1).min(self.ncx - 1) {
                if self.cells[cj * self.ncx + ci]
                    .iter()
                    .any(|&(a, b)| (x - a).hypot(y - b) < self.sep)
                {
                    return false;
                }
            }
        }
        true
    }

    fn push(&mut self, x: f64, y: f64) {
        let (i, j) = self.index(x, y);
        self.cells[j * self.ncx + i].push((x, y));
    }
}

/// The map's WCS, beam and conversion, or the refusal naming what is missing.
fn prerequisites<'a>(
    map: &'a Map,
    ctx: &'a Context,
) -> Result<(&'a crate::wcs::Wcs, crate::map::Beam, Converter<'a>)> {
    let wcs = map.wcs.as_ref().ok_or_else(|| {
        cannot(
            map,
            "has no celestial WCS, so its pixel size is unknown and cores of known mass cannot be injected; give a map with sky coordinates (CTYPE, CRVAL, CRPIX and CDELT or CD keywords).",
        )
    })?;
    let beam = map.beam.ok_or_else(|| {
        cannot(
            map,
            "has no beam (no BMAJ, BMIN and BPA), so injected cores cannot be given the map's resolution; give --beam, such as 18.2arcsec.",
        )
    })?;
    let conv = Converter::new(map, ctx).map_err(|why| {
        cannot(
            map,
            &format!(
                "cannot receive cores of known mass in its unit '{}' because {}",
                map.unit_text,
                why.trim_end_matches('.')
            ),
        )
    })?;
    Ok((wcs, beam, conv))
}

/// Injects `cores` at the positions they give (zero-based pixels) into `map` at `distance_pc`,
/// converted to its unit with `ctx`: the injected pixels, the truth and each core's sum over
/// the map in map units (see [`Injected`]). [`inject`] places a random population and calls it.
/// Like [`inject`], it moves the map's pixels into the result on success.
pub fn inject_at(
    map: &mut Map,
    ctx: &Context,
    cores: &[synth::CoreSpec],
    distance_pc: f64,
) -> Result<(Array2<f32>, Vec<TruthCore>, Vec<f64>)> {
    let (_, _, conv) = prerequisites(map, ctx)?;
    if !(distance_pc > 0.0 && distance_pc.is_finite()) {
        return Err(Error::usage(
            "injecting cores of known mass needs the distance: give --distance, such as 300pc.",
        ));
    }
    let base = SynthSpec {
        nx: map.nx(),
        ny: map.ny(),
        distance_pc,
        beam_fwhm_arcsec: 0.0,
        background: None,
        cores: Vec::new(),
        population: None,
        noise_rms: 0.0,
        mu_h2: ctx.mu_h2,
        ..SynthSpec::default()
    };
    let (layer, truth, core_sums) = add_cores(map, &conv, &base, cores)?;
    Ok((add_layer(map, layer)?, truth, core_sums))
}

/// The injected light: its sums in double precision, in the tiles of the map that some core
/// reaches (see [`add_cores`]).
struct Layer {
    /// Tiles in rows of `tiles_x`; `None` where no core reaches.
    tiles: Vec<Option<Box<[f64]>>>,
    tiles_x: usize,
}

/// Renders, convolves and converts `cores` and adds them to the map, in their order.
fn add_cores(
    map: &Map,
    conv: &Converter,
    base: &SynthSpec,
    cores: &[synth::CoreSpec],
) -> Result<(Layer, Vec<TruthCore>, Vec<f64>)> {
    let (wcs, beam) = match (&map.wcs, map.beam) {
        (Some(w), Some(b)) => (w, b),
        _ => return Err(Error::internal("add_cores without a WCS or beam")),
    };
    let (nx, ny) = (map.nx(), map.ny());
    // Rendering and convolution, in parallel by chunks; added in order.
    let oom = || {
        cannot(
            map,
            "is too large for the memory this machine can give while cores are injected; give a smaller map or smaller --core-radius.",
        )
    };
    let beam_sky = crate::measure::gaussian_sky_covariance(
        beam.major_deg * 3600.0,
        beam.minor_deg * 3600.0,
        beam.pa_deg,
    );
    // The cores' light, summed in double precision in the order of the cores, kept only in
    // the tiles of the map that some core reaches (a few hundred cores cover a small part of
    // a large map): the map then needs its own copy and little more, not a whole layer of
    // doubles as well. Each pixel's sum is the same additions in the same order either way.
    let tiles_x = nx.div_ceil(TILE);
    let tiles_y = ny.div_ceil(TILE);
    let mut layer: Vec<Option<Box<[f64]>>> = Vec::new();
    layer
        .try_reserve_exact(tiles_x * tiles_y)
        .map_err(|_| oom())?;
    layer.resize_with(tiles_x * tiles_y, || None);
    let mut truth = Vec::with_capacity(cores.len());
    let mut core_sums = Vec::with_capacity(cores.len());
    for (chunk_index, chunk) in cores.chunks(32).enumerate() {
        let patches: Vec<std::result::Result<(Patch, f64, f64), String>> = chunk
            .par_iter()
            .map(|c| {
                let omega = wcs.pixel_solid_angle(c.x, c.y);
                let j = crate::measure::local_jacobian(wcs, c.x, c.y)
                    .ok_or("the WCS cannot be evaluated at a core's position")?;
                if !(omega.is_finite() && omega > 0.0) {
                    return Err("the pixel size cannot be measured at a core's position".into());
                }
                let spec = SynthSpec {
                    pixel_arcsec: omega.sqrt() / ARCSEC,
                    population: None,
                    ..base.clone()
                };
                let stamp = synth::render_core(c, &spec, &mut Vec::new())
                    .map_err(|_| "no memory".to_string())?;
                let peak_col = stamp.values.iter().cloned().fold(0.0, f64::max);
                let kc = crate::resolution::sky_cov_to_pixels(beam_sky, j);
                let patch = convolve(&stamp, kc, nx, ny, conv)?;
                let peak = patch.values.iter().cloned().fold(f64::MIN, f64::max);
                Ok((patch, peak, peak_col))
            })
            .collect();
        for (k, res) in patches.into_iter().enumerate() {
            let (patch, peak, peak_col) = res.map_err(|why| {
                if why == "no memory" {
                    oom()
                } else {
                    cannot(map, &format!("cannot receive injected cores: {why}; give a map whose WCS covers its pixels."))
                }
            })?;
            let c = &chunk[k];
            let mut sum = 0.0;
            for (row, vals) in patch.values.chunks(patch.w).enumerate() {
                let y = patch.y0 + row;
                // The row's run through each tile it crosses.
                let mut x = patch.x0;
                for v_run in split_at_tiles(vals, patch.x0) {
                    let t = (y / TILE) * tiles_x + x / TILE;
                    let tile = match &mut layer[t] {
                        Some(tile) => tile,
                        empty => {
                            let mut v = Vec::new();
                            v.try_reserve_exact(TILE * TILE).map_err(|_| oom())?;
                            v.resize(TILE * TILE, 0.0f64);
                            empty.insert(v.into_boxed_slice())
                        }
                    };
                    let start = (y % TILE) * TILE + x % TILE;
                    for (l, v) in tile[start..start + v_run.len()].iter_mut().zip(v_run) {
                        *l += v;
                        sum += v;
                    }
                    x += v_run.len();
                }
            }
            let (lon, lat) = wcs.pixel_to_sky(c.x, c.y).unwrap_or((f64::NAN, f64::NAN));
            truth.push(TruthCore {
                id: chunk_index * 32 + k + 1,
                x: c.x,
                y: c.y,
                lon_deg: lon,
                lat_deg: lat,
                mass_msun: c.mass_msun,
                radius_pc: c.radius_pc,
                profile: match c.profile {
                    synth::Profile::Gaussian => "gaussian".into(),
                    synth::Profile::BonnorEbert { .. } => "bonnor_ebert".into(),
                },
                peak,
                peak_unit: map.unit_text.clone(),
                peak_column_cm2: peak_col * 1e-4,
            });
            core_sums.push(sum);
        }
    }

    Ok((
        Layer {
            tiles: layer,
            tiles_x,
        },
        truth,
        core_sums,
    ))
}

/// Adds the injected light to the map's own pixels, which are moved out of `map` rather than
/// copied (the injection then holds the map's bytes once): the map's pixels with the cores'.
/// A first pass checks that every sum fits in a 32-bit float, so that a refusal leaves `map`
/// as it was.
fn add_layer(map: &mut Map, layer: Layer) -> Result<Array2<f32>> {
    let (nx, ny) = (map.nx(), map.ny());
    let Layer {
        tiles: layer,
        tiles_x,
    } = layer;
    let tile_pixels = |t: usize| {
        let (ty, tx) = (t / tiles_x, t % tiles_x);
        (ty * TILE..((ty + 1) * TILE).min(ny))
            .flat_map(move |y| (tx * TILE..((tx + 1) * TILE).min(nx)).map(move |x| (y, x)))
    };
    let sum_at = |d: f32, tile: &[f64], (y, x): (usize, usize)| {
        (d as f64 + tile[(y % TILE) * TILE + x % TILE]) as f32
    };
    let overflow = layer.iter().enumerate().any(|(t, tile)| {
        tile.as_ref().is_some_and(|tile| {
            tile_pixels(t).any(|p| {
                let d = map.data[p];
                d.is_finite() && !sum_at(d, tile, p).is_finite()
            })
        })
    });
    if overflow {
        return Err(Error::usage(format!(
            "the injected cores make values beyond what {}'s 32-bit floats hold: lower --core-mass or raise --core-radius.",
            map.path.display()
        )));
    }
    let mut data = std::mem::take(&mut map.data);
    for (t, tile) in layer.iter().enumerate() {
        let Some(tile) = tile else { continue };
        for p in tile_pixels(t) {
            let d = &mut data[p];
            if d.is_finite() {
                *d = sum_at(*d, tile, p);
            }
        }
    }
    Ok(data)
}

thread_local! {
    /// One FFT planner per thread: it keeps the plans of the lengths met so far, so cores of
    /// the same stamp size (most of a population) reuse them.
    static PLANNER: std::cell::RefCell<FftPlanner<f64>> =
        std::cell::RefCell::new(FftPlanner::new());
}

/// Convolves a stamp of N(H2) \[m^-2\] with the Gaussian of pixel covariance `kc`, linearly
/// (zero padding), and converts it to map units; the result is clipped to the map.
fn convolve(
    stamp: &synth::Stamp,
    kc: [[f64; 2]; 2],
    nx: usize,
    ny: usize,
    conv: &Converter,
) -> std::result::Result<Patch, String> {
    let (a, b, c) = (kc[0][0], 0.5 * (kc[0][1] + kc[1][0]), kc[1][1]);
    let det = a * c - b * b;
    if !(a > 0.0 && c > 0.0 && det > 0.0 && det.is_finite()) {
        return Err("the beam has no extent in pixels at a core's position".into());
    }
    // Reach of the kernel along x and y: KERNEL_SIGMAS standard deviations of each marginal.
    let rx = (KERNEL_SIGMAS * a.sqrt()).ceil().max(1.0) as usize;
    let ry = (KERNEL_SIGMAS * c.sqrt()).ceil().max(1.0) as usize;
    let (lw, lh) = (stamp.w + 2 * rx, stamp.h + 2 * ry);
    let (ia, ib, ic) = (c / det, -b / det, a / det);
    let mut kern = vec![Complex::new(0.0, 0.0); lw * lh];
    let mut total = 0.0;
    for dy in -(ry as i64)..=ry as i64 {
        for dx in -(rx as i64)..=rx as i64 {
            let (x, y) = (dx as f64, dy as f64);
            let q = ia * x * x + 2.0 * ib * x * y + ic * y * y;
            if q > KERNEL_SIGMAS * KERNEL_SIGMAS {
                continue;
            }
            let v = (-0.5 * q).exp();
            let xx = dx.rem_euclid(lw as i64) as usize;
            let yy = dy.rem_euclid(lh as i64) as usize;
            kern[yy * lw + xx].re += v;
            total += v;
        }
    }
    for k in kern.iter_mut() {
        k.re /= total;
    }
    let mut g = vec![Complex::new(0.0, 0.0); lw * lh];
    for j in 0..stamp.h {
        for i in 0..stamp.w {
            g[(j + ry) * lw + i + rx].re = stamp.values[j * stamp.w + i];
        }
    }
    let (fx, fy, ix, iy) = PLANNER.with(|p| {
        let mut p = p.borrow_mut();
        (
            p.plan_fft_forward(lw),
            p.plan_fft_forward(lh),
            p.plan_fft_inverse(lw),
            p.plan_fft_inverse(lh),
        )
    });
    let fft2 =
        |g: &mut Vec<Complex<f64>>, row: &dyn rustfft::Fft<f64>, col: &dyn rustfft::Fft<f64>| {
            for r in g.chunks_mut(lw) {
                row.process(r);
            }
            let mut colbuf = vec![Complex::new(0.0, 0.0); lh];
            for x in 0..lw {
                for y in 0..lh {
                    colbuf[y] = g[y * lw + x];
                }
                col.process(&mut colbuf);
                for y in 0..lh {
                    g[y * lw + x] = colbuf[y];
                }
            }
        };
    fft2(&mut kern, fx.as_ref(), fy.as_ref());
    fft2(&mut g, fx.as_ref(), fy.as_ref());
    for (v, k) in g.iter_mut().zip(&kern) {
        *v *= k;
    }
    fft2(&mut g, ix.as_ref(), iy.as_ref());
    let norm = 1.0 / (lw * lh) as f64;
    // Box on the map: the stamp's box widened by the kernel's reach, clipped.
    let bx0 = stamp.x0 as i64 - rx as i64;
    let by0 = stamp.y0 as i64 - ry as i64;
    let x0 = bx0.max(0) as usize;
    let y0 = by0.max(0) as usize;
    let x1 = ((bx0 + lw as i64).min(nx as i64)) as usize;
    let y1 = ((by0 + lh as i64).min(ny as i64)) as usize;
    let w = x1 - x0;
    let mut values = Vec::with_capacity(w * (y1 - y0));
    for y in y0..y1 {
        for x in x0..x1 {
            let gi = (y as i64 - by0) as usize * lw + (x as i64 - bx0) as usize;
            // Column density in m^-2 over the factor N(H2) per map unit.
            values.push(g[gi].re * norm / conv.factor(y, x));
        }
    }
    Ok(Patch { x0, y0, w, values })
}

/// The input's header for the injected map: structural, scaling and checksum keywords left
/// out (the image is written as 32-bit floats), then HISTORY cards saying what was injected.
fn injected_header(
    map: &Map,
    opts: &InjectOptions,
    p: &CorePopulation,
    separation_arcsec: f64,
    n: usize,
) -> Header {
    let mut cards = image_header(map).cards().to_vec();
    let t = crate::units::tidy;
    let profile = match p.profile {
        synth::Profile::Gaussian => "Gaussian".to_string(),
        synth::Profile::BonnorEbert { xi_max } => format!("Bonnor-Ebert xi_max {}", t(xi_max)),
    };
    let name = map
        .path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let lines = [
        format!(
            "cairn {} injected {n} synthetic cores",
            env!("CARGO_PKG_VERSION")
        ),
        format!("into {name} (HDU {})", map.hdu_index),
        format!(
            "masses {} to {} Msun, dN/dM ~ M^-{}",
            t(p.mass_min_msun),
            t(p.mass_max_msun),
            t(p.mass_index)
        ),
        format!(
            "radii {} to {} pc, {profile}",
            t(p.radius_min_pc),
            t(p.radius_max_pc)
        ),
        format!("at {} pc, seed {}", t(opts.distance_pc), opts.seed),
        format!("at least {} arcsec apart", t(separation_arcsec)),
        "convolved with the map's beam; truth in NAME-truth.csv".to_string(),
    ];
    for l in lines {
        cards.push(Card {
            key: "HISTORY".into(),
            value: None,
            comment: l,
        });
    }
    Header::from_cards(cards)
}

/// The header of `map` for a 32-bit float copy of its image: the input's cards without the
/// structural, scaling, checksum, data-range (DATAMIN/DATAMAX, stale once cores are added)
/// and tile-compression keywords (the writer adds its own);
/// WCSAXES as it was (it may exceed NAXIS, and must cover the plane axis's cards the copy
/// keeps: FITS WCS Paper I, Greisen & Calabretta 2002, from memory); and for a plane of a
/// cube, the reference pixel of the plane's axis moved so that the copy's one pixel along
/// that axis (p = 1) is the plane taken, so the copy keeps the plane's frequency or
/// wavelength.
pub fn image_header(map: &Map) -> Header {
    let drop = |k: &str| {
        matches!(
            k,
            "XTENSION"
                | "PCOUNT"
                | "GCOUNT"
                | "BSCALE"
                | "BZERO"
                | "BLANK"
                | "CHECKSUM"
                | "DATASUM"
                | "DATAMIN"
                | "DATAMAX"
        ) || compressed_key(k)
    };
    let cards: Vec<Card> = map
        .header
        .cards()
        .iter()
        .filter(|c| !(c.value.is_some() && drop(&c.key)))
        .cloned()
        .collect();
    let mut h = Header::from_cards(cards);
    if let Some(k) = map.plane {
        // The plane's axis: the one extra axis longer than 1 (1-based number).
        if let Some(axis) = (2..map.stored_axes.len()).find(|&i| map.stored_axes[i] > 1) {
            let key = format!("CRPIX{}", axis + 1);
            // A missing CRPIXn is 0 (FITS WCS Paper I, Greisen & Calabretta 2002).
            let crpix = h.get_f64(&key).unwrap_or(0.0);
            h.set(
                &key,
                Value::Float(crpix - k as f64),
                "moved to the plane taken",
            );
        }
    }
    h
}

/// Keywords of a tile-compressed image's table (FITS Standard 4.0, section 10), which an
/// uncompressed copy must not carry.
fn compressed_key(k: &str) -> bool {
    const EXACT: [&str; 14] = [
        "ZIMAGE", "ZBITPIX", "ZNAXIS", "ZCMPTYPE", "ZQUANTIZ", "ZDITHER0", "ZSIMPLE", "ZEXTEND",
        "ZBLOCKED", "ZTENSION", "ZPCOUNT", "ZGCOUNT", "ZHECKSUM", "ZDATASUM",
    ];
    const NUMBERED: [&str; 8] = [
        "ZNAXIS", "ZTILE", "ZNAME", "ZVAL", "TTYPE", "TFORM", "TUNIT", "TDIM",
    ];
    EXACT.contains(&k)
        || k == "TFIELDS"
        || NUMBERED.iter().any(|p| {
            k.strip_prefix(p)
                .is_some_and(|r| !r.is_empty() && r.bytes().all(|b| b.is_ascii_digit()))
        })
}

/// The separation \[arcsec\] between two positions in degrees (Vincenty's formula for the
/// sphere, accurate at every separation).
pub fn separation_arcsec(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    let (l1, b1, l2, b2) = (
        lon1.to_radians(),
        lat1.to_radians(),
        lon2.to_radians(),
        lat2.to_radians(),
    );
    let dl = l2 - l1;
    let (sd, cd) = dl.sin_cos();
    let (s1, c1) = b1.sin_cos();
    let (s2, c2) = b2.sin_cos();
    let num = (c2 * sd).hypot(c1 * s2 - s1 * c2 * cd);
    let den = s1 * s2 + c1 * c2 * cd;
    num.atan2(den).to_degrees() * 3600.0
}

#[cfg(test)]
mod tests {
    use super::Placed;
    use rand::{RngExt, SeedableRng};

    /// The cells give the same answer as testing every placed position, for separations
    /// narrower and wider than the cells, and positions on and beyond the map's edges.
    #[test]
    fn cells_answer_as_every_position_does() {
        let mut r = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        for &(nx, ny, sep, n) in &[
            (200, 120, 9.5, 150),
            (64, 64, 0.7, 400),
            (300, 40, 55.0, 30),
            (50, 500, 3.0, 2),
        ] {
            let mut placed = Placed::new(nx, ny, sep, n);
            let mut all: Vec<(f64, f64)> = Vec::new();
            let mut kept = 0;
            for _ in 0..20 * n {
                let x = -5.0 + r.random::<f64>() * (nx as f64 + 10.0);
                let y = -5.0 + r.random::<f64>() * (ny as f64 + 10.0);
                let every = all.iter().all(|&(a, b)| (x - a).hypot(y - b) >= sep);
                assert_eq!(
                    placed.far(x, y),
                    every,
                    "({x}, {y}) on {nx} x {ny}, sep {sep}"
                );
                if every && all.len() < n {
                    placed.push(x, y);
                    all.push((x, y));
                    kept += 1;
                }
            }
            assert!(kept >= 2, "the case placed {kept} positions");
        }
    }
}
