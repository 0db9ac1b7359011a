//! The `cairn` command: argument parsing and printing only; the science is in the library.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};

use cairn::error::{Error, Result};
use cairn::inspect::{self, NoiseChoice};
use cairn::map::{self, Beam, HduChoice, LoadOptions};
use cairn::units::{self, Dimension, ExtinctionBand};
use cairn::{fits_write, output, synth};

/// Set when writing to standard output failed for a reason other than a closed pipe.
static STDOUT_FAILED: std::sync::Mutex<Option<String>> = std::sync::Mutex::new(None);

/// Writes to standard output. A reader that stopped early (`cairn ... | head -1`) is not an
/// error: the rest is dropped quietly and the run finishes (its files are its product). Any
/// other failure (a full disk behind a redirection) is reported when the run ends.
fn print_out(args: std::fmt::Arguments) {
    use std::io::Write as _;
    let mut out = std::io::stdout().lock();
    if let Err(e) = out.write_fmt(args)
        && e.kind() != std::io::ErrorKind::BrokenPipe
    {
        let mut f = STDOUT_FAILED.lock().unwrap_or_else(|p| p.into_inner());
        f.get_or_insert_with(|| e.to_string());
    }
}

/// `eprintln!` that ignores a failed write: a closed stderr (`2>&1 | true`) must neither panic
/// nor change the run's outcome, which its files and exit code carry.
macro_rules! errln {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr(), $($t)*);
    }};
}

/// `println!` through [`print_out`].
macro_rules! outln {
    ($($t:tt)*) => { print_out(format_args!("{}\n", format_args!($($t)*))) };
}

/// Find dense cores and clumps in maps of molecular clouds, see how they nest, measure them.
#[derive(Parser)]
#[command(name = "cairn", version, about, long_about = None, propagate_version = true)]
struct Cli {
    /// Print nothing on stderr but errors and warnings (no progress).
    #[arg(long, short, global = true)]
    quiet: bool,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Say what a map is: shape, unit, sky frame, beam, wavelength, noise, suggested thresholds.
    #[command(
        after_help = "Caution: the conversions to column density and mass carry factor-of-two systematics from dust opacity,\ntemperature and distance (for extinction maps, from the extinction-to-column ratio and distance)."
    )]
    Inspect(Box<InspectArgs>),
    /// Find the structures of a map: hierarchy, catalogue, label maps, tree file and run record.
    #[command(after_help = SEGMENT_HELP)]
    Segment(Box<SegmentArgs>),
    /// Draw the figures of a finished run again, with other style options.
    Draw(Box<DrawArgs>),
    /// Compare the core populations of finished runs: mass functions, tests, mass-size relations.
    #[command(
        after_help = "Caution: masses carry factor-of-two systematics from dust opacity, temperature and distance;\ndifferences between clouds smaller than that need the same assumptions on both sides (compare warns when they differ)."
    )]
    Compare(Box<CompareArgs>),
    /// Make a synthetic map with known truth: turbulent background, cores, beam and noise; or,
    /// with --into, inject cores of known mass into a real map to measure completeness.
    #[command(after_help = SYNTH_HELP)]
    Synth(Box<SynthArgs>),
}

const SEGMENT_HELP: &str = "Thresholds take units: --floor 5sigma or 2e21cm-2, --prominence 3sigma, --min-area 1beam, 400arcsec2 or 12px.
A floor in sigma is that many noise widths above the background (the clipped median of the map); a value in map units is an absolute level.
Without them: floor 3 sigma above the clipped median, prominence 3 sigma, min-area one beam (a starting point: check `cairn inspect`).
Writes structures.csv/.fits/.vot, labels.fits (smallest structure per pixel, with the map's WCS), hierarchy.json/.dot and run.json;
overlay.png/.svg/.pdf and tree.png/.svg/.pdf unless --no-figure; with --grow-leaves, leaves-grown.fits and
structures-grown.csv/.fits/.vot (the leaves measured over those footprints, above the floor).
Caution: the catalogue's masses carry factor-of-two systematics from dust opacity, temperature and distance
(mass_err is the map noise only); density, Jeans, Bonnor-Ebert and virial columns use mass_excess.";

const SYNTH_HELP: &str = "With --into MAP: the map's grid, WCS, beam and unit are used, read as segment reads them (--hdu, --plane,
--unit, --extinction-band, --beam, --wavelength); --cores cores of --core-mass and --core-radius are placed at random on
valid pixels away from the edges, at least --min-separation apart (by default far enough to be isolated), convolved
with the map's beam, converted to its unit (emission maps need --temperature or --temperature-map and take --opacity, --opacity-frequency
and --beta; extinction maps take --column-per-av and --av-per-ak) and added to it. Writes NAME.fits (the input's
header with HISTORY cards), NAME-truth.csv (recording NAME.fits's SHA-256) and NAME-spec.json; the input is never
modified. Score a segment run of NAME.fits with: cairn compare RUN --truth NAME-truth.csv -o DIR.";

#[derive(Args)]
struct SegmentArgs {
    /// The FITS map.
    map: PathBuf,
    /// Output folder.
    #[arg(short, long, value_name = "DIR")]
    output: PathBuf,
    #[command(flatten)]
    read: MapArgs,
    #[command(flatten)]
    physics: PhysicsArgs,
    #[command(flatten)]
    motion: MotionArgs,
    /// Lowest level considered: noise widths above the background (5sigma), a value in the
    /// map's unit, or on a map of another kind a column density (2e21cm-2) or an extinction
    /// (7mag, of A_V unless --extinction-band K), converted as the masses are (this needs
    /// --temperature on an emission map, and is refused with --temperature-map or on a
    /// Jy/pixel map, whose conversion differs from pixel to pixel).
    #[arg(long, value_name = "LEVEL", allow_hyphen_values = true)]
    floor: Option<String>,
    /// How far a peak must rise above the level where it meets a neighbour (3sigma, map
    /// units, or a column density or extinction as for --floor).
    #[arg(long, value_name = "LEVEL", allow_hyphen_values = true)]
    prominence: Option<String>,
    /// Least area of a leaf: pixels (12px or 12), beams (1beam) or sky area (400arcsec2).
    #[arg(long, value_name = "AREA", allow_hyphen_values = true)]
    min_area: Option<String>,
    /// Pixel adjacency: 4 (edges) or 8 (edges and corners) [default: 8, or the run's with
    /// --thresholds-from].
    #[arg(long, value_name = "4|8")]
    connectivity: Option<String>,
    /// Take the floor, prominence, least area and connectivity from an earlier run (its folder
    /// or run.json), in the map units and pixels that run used, as for a map with injected
    /// cores that must be segmented as the science run was; --floor, --prominence, --min-area
    /// or --connectivity given beside it replace the run's own.
    #[arg(long, value_name = "RUN")]
    thresholds_from: Option<PathBuf>,
    /// Also write leaf footprints grown down to the floor (leaves-grown.fits) and the leaves
    /// measured over them (structures-grown.csv/.fits/.vot).
    #[arg(long)]
    grow_leaves: bool,
    /// Catalogue leaves only (a plain core list).
    #[arg(long)]
    leaves_only: bool,
    /// Smooth (and regrid) the map to this linear resolution before extraction, such as
    /// 0.05pc (needs --distance and a beam), so clouds at different distances compare fairly.
    #[arg(long, value_name = "LENGTH", allow_hyphen_values = true)]
    common_resolution: Option<String>,
    /// Draw no figures (overlay.png/svg/pdf, tree.png/svg/pdf).
    #[arg(long)]
    no_figure: bool,
    #[command(flatten)]
    style: StyleArgs,
    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
}

#[derive(Args)]
struct SynthArgs {
    /// Output folder for NAME.fits, NAME-truth.csv and NAME-spec.json.
    #[arg(short, long, value_name = "DIR")]
    output: PathBuf,
    /// Base name of the output files.
    #[arg(long, default_value = "synth")]
    name: String,
    /// A full specification as JSON (as written to NAME-spec.json by synth without --into);
    /// each other option given replaces its own field only, and the rest keep the spec's values
    /// (not the defaults shown here).
    #[arg(conflicts_with = "into", long, value_name = "FILE")]
    spec: Option<PathBuf>,
    /// Map size in pixels: `N` or `NXxNY`, such as 512 or 600x400 [default: 256].
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "N|NXxNY",
        allow_hyphen_values = true
    )]
    size: Option<String>,
    /// Pixel size, such as 6arcsec [default: 6arcsec].
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "ANGLE",
        allow_hyphen_values = true
    )]
    pixel: Option<String>,
    /// Map centre as `lon,lat` in degrees or sexagesimal, such as 13h25m30s,-31d37m30s or
    /// 13:25:30,-31:37:30 (colons are hours for a right ascension; invented positions)
    /// [default: 201.375,-31.625].
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "LON,LAT",
        allow_hyphen_values = true
    )]
    centre: Option<String>,
    /// Sky frame: icrs, fk5 or galactic [default: icrs].
    #[arg(conflicts_with = "into", long, value_name = "FRAME")]
    frame: Option<String>,
    /// Distance of the invented cloud, such as 250pc [default: 250pc]; with --into, the
    /// distance of the map's cloud (needed).
    #[arg(long, value_name = "LENGTH", allow_hyphen_values = true)]
    distance: Option<String>,
    /// Beam FWHM, such as 18arcsec; 0arcsec for no smoothing [default: 18arcsec]. With --into:
    /// the map's beam instead of BMAJ/BMIN/BPA, `18.2arcsec` or `major,minor,angle`.
    #[arg(long, value_name = "ANGLE", allow_hyphen_values = true)]
    beam: Option<String>,
    /// Mean column density of the log-normal background, such as 3e21cm-2 [default: 3e21cm-2].
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "COLUMN",
        allow_hyphen_values = true
    )]
    background: Option<String>,
    /// Width (standard deviation of ln N) of the background's log-normal distribution [default: 0.4].
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "SIGMA",
        allow_hyphen_values = true
    )]
    background_width: Option<f64>,
    /// Power-spectrum index of the background, P(k) ~ k^-INDEX [default: 3].
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "INDEX",
        allow_hyphen_values = true
    )]
    background_index: Option<f64>,
    /// No background: cores on an empty sky.
    #[arg(long, conflicts_with_all = ["background", "background_width", "background_index", "into"])]
    no_background: bool,
    /// Number of randomly placed cores to add [default: 0]; 0 drops a spec's random cores.
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    cores: Option<usize>,
    /// Core mass range of the random cores (--cores, or a spec's), such as 0.5Msun,20Msun
    /// [default: 0.5Msun,20Msun].
    #[arg(long, value_name = "MIN,MAX", allow_hyphen_values = true)]
    core_mass: Option<String>,
    /// Index of the core mass distribution dN/dM ~ M^-INDEX [default: 2.35].
    #[arg(long, value_name = "INDEX", allow_hyphen_values = true)]
    core_mass_index: Option<f64>,
    /// Core radius range, such as 0.02pc,0.08pc (drawn uniformly in log) [default: 0.02pc,0.08pc].
    #[arg(long, value_name = "MIN,MAX", allow_hyphen_values = true)]
    core_radius: Option<String>,
    /// Profile of the random cores: gaussian or bonnor-ebert (critical sphere) [default:
    /// gaussian].
    #[arg(long, value_name = "PROFILE")]
    profile: Option<String>,
    /// Make dust emission at this wavelength (such as 850um) instead of column density.
    #[arg(conflicts_with = "into", long, value_name = "LENGTH")]
    emission: Option<String>,
    /// Dust temperature for --emission, such as 15K [default: 15K]; with --into, the dust
    /// temperature that converts cores to an emission map's unit (needed for emission maps).
    #[arg(
        long,
        value_name = "TEMPERATURE",
        allow_hyphen_values = true,
        conflicts_with = "temperature_map"
    )]
    temperature: Option<String>,
    /// With --into: a FITS map of the dust temperature in K on the map's grid, instead of
    /// --temperature (as segment takes it; give segment the same map).
    #[arg(long, value_name = "FILE", requires = "into")]
    temperature_map: Option<PathBuf>,
    /// Unit of emission maps: MJy/sr or Jy/beam [default: MJy/sr].
    #[arg(conflicts_with = "into", long, value_name = "UNIT")]
    emission_unit: Option<String>,
    /// White-noise rms in the output unit (a number, or a quantity such as 1e20cm-2).
    #[arg(
        conflicts_with = "into",
        long,
        value_name = "VALUE",
        allow_hyphen_values = true
    )]
    noise: Option<String>,
    /// Seed of every random stream [default: 1].
    #[arg(long, allow_hyphen_values = true)]
    seed: Option<u64>,
    /// Mean molecular weight per H2 molecule: a core of mass M holds M / (MU m_H) molecules
    /// [default: 2.8]; give segment the same value (compare --truth warns when they differ).
    #[arg(long, value_name = "MU", allow_hyphen_values = true)]
    mu_h2: Option<f64>,
    /// Inject the cores into this FITS map (its grid, WCS, beam and unit) instead of making a
    /// synthetic map; needs --distance and --cores.
    #[arg(long, value_name = "MAP", requires_all = ["distance", "cores"])]
    into: Option<PathBuf>,
    /// With --into: least distance between two injected cores, such as 40arcsec [default: twice
    /// the widest core as observed, twice its radius and the beam in quadrature].
    #[arg(
        long,
        value_name = "ANGLE",
        requires = "into",
        allow_hyphen_values = true
    )]
    min_separation: Option<String>,
    /// With --into: HDU to read, a zero-based index or an EXTNAME.
    #[arg(
        long,
        value_name = "N|NAME",
        requires = "into",
        allow_hyphen_values = true
    )]
    hdu: Option<String>,
    /// With --into: for a cube, the zero-based plane to take.
    #[arg(long, value_name = "K", requires = "into", allow_hyphen_values = true)]
    plane: Option<i64>,
    /// With --into: unit of the map's pixels instead of BUNIT.
    #[arg(long, value_name = "UNIT", requires = "into")]
    unit: Option<String>,
    /// With --into: band of an extinction map in magnitudes, V or K [default: V, unless BUNIT
    /// names the band, such as mag(AK)].
    #[arg(long, value_name = "V|K", requires = "into")]
    extinction_band: Option<String>,
    /// With --into: wavelength or frequency of the map instead of the header's, such as 850um.
    #[arg(
        long,
        value_name = "LENGTH|FREQ",
        requires = "into",
        allow_hyphen_values = true
    )]
    wavelength: Option<String>,
    /// With --into: a pixel value that marks missing pixels besides NaN and BLANK, such as 0
    /// for a zero-filled border; no core is placed over them, and they are written as NaN in
    /// the injected map, so it is segmented without --missing-value.
    #[arg(
        long,
        value_name = "VALUE",
        requires = "into",
        allow_hyphen_values = true
    )]
    missing_value: Option<String>,
    /// Dust opacity per gram of gas at --opacity-frequency, for --emission or an emission map
    /// given --into [default: 0.1cm2/g].
    #[arg(long, value_name = "OPACITY", allow_hyphen_values = true)]
    opacity: Option<String>,
    /// Reference frequency of --opacity, for --emission or --into [default: 1THz].
    #[arg(long, value_name = "FREQ", allow_hyphen_values = true)]
    opacity_frequency: Option<String>,
    /// Dust emissivity index beta, for --emission or --into [default: 2].
    #[arg(long, value_name = "BETA", allow_hyphen_values = true)]
    beta: Option<f64>,
    /// With --into: N(H2) per magnitude of A_V [default: 9.4e20cm-2].
    #[arg(
        long,
        value_name = "COLUMN",
        requires = "into",
        allow_hyphen_values = true
    )]
    column_per_av: Option<String>,
    /// With --into: A_V per magnitude of A_K [default: 1/0.112 = 8.929].
    #[arg(
        long,
        value_name = "RATIO",
        requires = "into",
        allow_hyphen_values = true
    )]
    av_per_ak: Option<f64>,
    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
}

/// Options that say how to read a map; shared by every command that reads one.
#[derive(Args, Clone)]
struct MapArgs {
    /// HDU to read: a zero-based index (0 = primary) or an EXTNAME [default: the first image with data].
    #[arg(long, value_name = "N|NAME", allow_hyphen_values = true)]
    hdu: Option<String>,
    /// For a cube: the zero-based plane to take along its one long extra axis.
    #[arg(long, value_name = "K", allow_hyphen_values = true)]
    plane: Option<i64>,
    /// Unit of the pixels, instead of BUNIT: cm-2, m-2, mag, MJy/sr, Jy/sr, mJy/arcsec2, Jy/arcmin2, MJy/deg2, Jy/beam, mJy/beam, Jy/pixel; or other:UNIT (such as other:K km/s) for a unit cairn does not convert to column density, or none for values without a unit: the structure alone is measured, without masses.
    #[arg(long, value_name = "UNIT")]
    unit: Option<String>,
    /// Band of an extinction map in magnitudes: V (A_V) or K (A_K) [default: V, unless BUNIT
    /// names the band, such as mag(AK)].
    #[arg(long, value_name = "V|K")]
    extinction_band: Option<String>,
    /// Beam FWHM instead of BMAJ/BMIN/BPA: `18.2arcsec`, or `major,minor,angle` such as `20arcsec,15arcsec,30deg`.
    #[arg(long, value_name = "FWHM", allow_hyphen_values = true)]
    beam: Option<String>,
    /// Wavelength or frequency of the map instead of the header's, such as `850um` or `353GHz`.
    #[arg(long, value_name = "LENGTH|FREQ", allow_hyphen_values = true)]
    wavelength: Option<String>,
    /// A pixel value that marks missing pixels besides NaN and BLANK, such as 0 for a map whose
    /// unobserved border is filled with zeros (they would otherwise count as data, lowering
    /// the noise estimate and the thresholds).
    #[arg(long, value_name = "VALUE", allow_hyphen_values = true)]
    missing_value: Option<String>,
    /// Noise in map units (a number, or a quantity such as `0.02MJy/sr`), instead of the estimate.
    #[arg(
        long,
        value_name = "VALUE",
        conflicts_with = "noise_map",
        allow_hyphen_values = true
    )]
    noise: Option<String>,
    /// A FITS map of the noise on the same grid, instead of the estimate. Its median sets
    /// sigma thresholds; the error columns use each structure's own pixels' noise.
    #[arg(long, value_name = "FILE")]
    noise_map: Option<PathBuf>,
}

/// Physical assumptions: distance, temperature, dust opacity, molecular weights.
#[derive(Args, Clone)]
struct PhysicsArgs {
    /// Distance to the cloud, such as 300pc (without it: no masses, sizes in angle only;
    /// column densities are still reported, on emission maps when --temperature is given).
    #[arg(long, value_name = "LENGTH", allow_hyphen_values = true)]
    distance: Option<String>,
    /// Dust temperature, such as 12K (for the masses of emission maps; segment also uses it,
    /// as the gas temperature, for the gravitational state). 2.7255 K to 2000 K.
    #[arg(
        long,
        value_name = "TEMPERATURE",
        conflicts_with = "temperature_map",
        allow_hyphen_values = true
    )]
    temperature: Option<String>,
    /// A FITS map of the dust temperature in K on the same grid (held to --temperature's
    /// range; a map in mK is refused with a hint).
    #[arg(long, value_name = "FILE")]
    temperature_map: Option<PathBuf>,
    /// Dust opacity per gram of gas at --opacity-frequency [default: 0.1cm2/g].
    #[arg(long, value_name = "OPACITY", allow_hyphen_values = true)]
    opacity: Option<String>,
    /// Reference frequency of --opacity [default: 1THz].
    #[arg(long, value_name = "FREQ", allow_hyphen_values = true)]
    opacity_frequency: Option<String>,
    /// Dust emissivity index beta [default: 2].
    #[arg(long, value_name = "BETA", allow_hyphen_values = true)]
    beta: Option<f64>,
    /// Mean molecular weight per H2 molecule [default: 2.8].
    #[arg(long, value_name = "MU", allow_hyphen_values = true)]
    mu_h2: Option<f64>,
    /// Mean molecular weight per free particle [default: 2.33].
    #[arg(long, value_name = "MU", allow_hyphen_values = true)]
    mu_particle: Option<f64>,
    /// N(H2) per magnitude of A_V [default: 9.4e20cm-2].
    #[arg(long, value_name = "COLUMN", allow_hyphen_values = true)]
    column_per_av: Option<String>,
    /// A_V per magnitude of A_K [default: 1/0.112 = 8.929].
    #[arg(long, value_name = "RATIO", allow_hyphen_values = true)]
    av_per_ak: Option<f64>,
}

/// The gas motions, which only `segment` uses (the virial parameter of each structure).
#[derive(Args)]
struct MotionArgs {
    /// One-dimensional non-thermal velocity dispersion, such as 0.3km/s (enables the virial
    /// parameter); warned about above 50 km/s, refused above 1000 km/s.
    #[arg(
        long,
        value_name = "SPEED",
        conflicts_with = "sigma_nt_map",
        allow_hyphen_values = true
    )]
    sigma_nt: Option<String>,
    /// A FITS map of the non-thermal velocity dispersion on the same grid (in the speed unit
    /// of its BUNIT, else km/s), held to the limits of --sigma-nt.
    #[arg(long, value_name = "FILE")]
    sigma_nt_map: Option<PathBuf>,
}

impl MotionArgs {
    /// Adds the velocity dispersion to `c`; `notes` receives warnings about it.
    fn apply(
        &self,
        map: &map::Map,
        c: &mut cairn::score::Context,
        notes: &mut Vec<String>,
    ) -> Result<()> {
        use cairn::score::Field;
        if let Some(s) = &self.sigma_nt {
            let v = units::parse_quantity(s, &[Dimension::Speed], "--sigma-nt")
                .map_err(Error::usage)?
                .si;
            if v.is_nan() || v < 0.0 {
                return Err(Error::usage(format!(
                    "--sigma-nt {} must be a dispersion of zero or more, such as 0.3km/s.",
                    s.trim()
                )));
            }
            notes.extend(cairn::score::check_sigma_nt(v / 1e3, s.trim()).map_err(Error::usage)?);
            c.sigma_nt = Some(Field::Uniform(v));
        }
        if let Some(p) = &self.sigma_nt_map {
            // A dispersion of zero is a purely thermal region.
            let (m, bunit) = inspect::load_aux_map_with_unit(
                map,
                p,
                "velocity-dispersion map",
                "velocity dispersions",
                true,
                inspect::AuxUnit::KmPerS,
            )?;
            notes.extend(cairn::score::check_sigma_nt_map(map, p, &m, &bunit)?);
            c.sigma_nt = Some(Field::Map(m.mapv(|v| v * 1e3)));
        }
        Ok(())
    }
}

/// A quantity typed on the command line, of one of `dims`; a usage error names `what`.
fn q(text: &str, dims: &[Dimension], what: &str) -> Result<units::Quantity> {
    units::parse_quantity(text, dims, what).map_err(Error::usage)
}

/// `v` if it is positive and finite; `what` is the option with its value as given
/// (`--distance -410pc`), as the value itself is in SI units by then.
fn positive(v: f64, what: &str) -> Result<f64> {
    if v > 0.0 && v.is_finite() {
        Ok(v)
    } else {
        Err(Error::usage(format!(
            "{what} must be positive and finite; give a positive value."
        )))
    }
}

impl PhysicsArgs {
    /// The physical assumptions; `notes` receives warnings about them.
    fn context(&self, map: &map::Map, notes: &mut Vec<String>) -> Result<cairn::score::Context> {
        use cairn::score::{Context, Field};
        let mut c = Context::default();
        if let Some(d) = &self.distance {
            let m = positive(
                q(d, &[Dimension::Length], "--distance")?.si,
                &format!("--distance {d}"),
            )?;
            notes.extend(cairn::score::distance_warning(m, d.trim()));
            c.distance_m = Some(m);
        }
        let t_cmb = cairn::physics::constants::T_CMB;
        if let Some(t) = &self.temperature {
            let k = positive(
                q(t, &[Dimension::Temperature], "--temperature")?.si,
                &format!("--temperature {t}"),
            )?;
            if k < t_cmb {
                return Err(Error::usage(format!(
                    "--temperature {t} is colder than the cosmic microwave background ({t_cmb} K), which no dust or gas in a molecular cloud is; give the temperature in kelvin, such as 15K."
                )));
            }
            if k > cairn::score::T_HOTTEST_K {
                return Err(Error::usage(format!(
                    "--temperature {t} is hotter than dust survives or molecules hold together (about {} K); give the temperature in kelvin, such as 15K.",
                    cairn::score::T_HOTTEST_K
                )));
            }
            c.temperature_k = Some(Field::Uniform(k));
        }
        if let Some(p) = &self.temperature_map {
            let mut t = inspect::load_aux_map(
                map,
                p,
                "temperature map",
                "temperatures",
                false,
                inspect::AuxUnit::Kelvin,
            )?;
            cairn::score::check_temperature_map(p, &t)?;
            match cairn::score::fill_undefined_temperatures(&mut t, map.data.view()) {
                Err(why) => return Err(Error::input(p, format!("{why}."))),
                Ok(Some((n, median))) => notes.push(format!(
                    "the temperature map {} is undefined (NaN) at {} where the map has data; {} its median, {} K, so that the structures there keep their column densities and masses",
                    p.display(),
                    match n {
                        1 => "1 pixel".to_string(),
                        n => format!("{n} pixels"),
                    },
                    if n == 1 { "it takes" } else { "they take" },
                    cairn::units::tidy(median)
                )),
                Ok(None) => {}
            }
            c.temperature_k = Some(Field::Map(t));
        }
        c.opacity = dust_opacity(
            self.opacity.as_deref(),
            self.opacity_frequency.as_deref(),
            self.beta,
            c.opacity,
        )?;
        if let Some(m) = self.mu_h2 {
            c.mu_h2 = positive(m, &format!("--mu-h2 {m}"))?;
        }
        if let Some(m) = self.mu_particle {
            c.mu_p = positive(m, &format!("--mu-particle {m}"))?;
        }
        if let Some(n) = &self.column_per_av {
            c.nh2_per_av_m2 = positive(
                q(n, &[Dimension::ColumnDensity], "--column-per-av")?.si,
                &format!("--column-per-av {n}"),
            )?;
        }
        if let Some(r) = self.av_per_ak {
            c.av_per_ak = positive(r, &format!("--av-per-ak {r}"))?;
        }
        Ok(c)
    }
}

/// How figures look.
#[derive(Args, Clone)]
struct StyleArgs {
    /// Colour stretch: linear, sqrt, log or asinh.
    #[arg(long, default_value = "linear", value_name = "STRETCH")]
    stretch: String,
    /// Colour limits as percentiles of the shown pixels, `LOW,HIGH`.
    #[arg(
        long,
        default_value = "0.5,99.5",
        value_name = "LOW,HIGH",
        conflicts_with = "range",
        allow_hyphen_values = true
    )]
    limits: String,
    /// Colour limits as map values, `LOW,HIGH` (instead of --limits).
    #[arg(long, value_name = "LOW,HIGH", allow_hyphen_values = true)]
    range: Option<String>,
    /// Colour map: viridis, inferno, magma, cividis or grey (for print).
    #[arg(long, default_value = "viridis", value_name = "NAME")]
    colormap: String,
    /// Figure width in pixels (PNG; with --dpi, the print width of the SVG and PDF), 200 to
    /// 20000; a width too narrow for the map beside its axis and colour-bar labels at --dpi is
    /// refused with the narrowest that works, and so is a figure of more than 150 megapixels.
    /// A map more than twice as tall as wide gets a narrower figure (said in the summary).
    /// [default: 1600]
    #[arg(long, value_name = "PX", allow_hyphen_values = true)]
    width: Option<u32>,
    /// Print resolution recorded in the PNG (and setting the PDF's page size with --width), 30
    /// to 2400; text is 9 pt at this resolution.
    #[arg(
        long,
        default_value_t = 300.0,
        value_name = "DPI",
        allow_hyphen_values = true
    )]
    dpi: f64,
    /// Also outline the top-level structures that have children.
    #[arg(long)]
    branches: bool,
    /// Which leaves get their id written beside them, and above them in the tree diagram (all
    /// are outlined): all, none, states
    /// (bound, or bound,marginal; needs the run's states), a number N for the N highest peaks
    /// (of those in --region), or a least mass such as 2Msun (the catalogue's `mass`, the whole
    /// footprint's; needs the run's masses). Labels are placed highest peak first.
    #[arg(long, default_value = "all", value_name = "WHICH")]
    labels: String,
    /// Draw only a square part: `X,Y,SIZE`. The size's unit says how the centre is read: with a
    /// size in px (or a plain number), a pixel centre on the map (256,192,100px); with an
    /// angular size, a sky centre, square on the sky, in degrees or sexagesimal
    /// (152.81,11.40,5arcmin, 10h11m15s,+11d24m,5arcmin or 10:11:15,+11:24:00,5arcmin; colons
    /// are hours for a right ascension, degrees for a latitude), in the map's frame unless one
    /// is named first and converted from: icrs:, fk5: (J2000) or galactic: (gal:), such as
    /// galactic:231.5,-4.25,5arcmin.
    #[arg(long, value_name = "X,Y,SIZE", allow_hyphen_values = true)]
    region: Option<String>,
}

impl StyleArgs {
    /// The figure width, `--width` or its default.
    fn width(&self) -> u32 {
        self.width.unwrap_or(1600)
    }

    /// The figure style, its options checked; `drawn`: whether a figure will be drawn (else
    /// the notes about what a figure would show are not printed).
    fn style(&self, map: &map::Map, drawn: bool, skippable: bool) -> Result<cairn::render::Style> {
        let width = self.width();
        use cairn::render::{ColorMap, Limits, Stretch, Style};
        let pair = |t: &str, what: &str| -> Result<(f64, f64)> {
            let bad = || {
                Error::usage(format!(
                    "{what} '{t}' is not understood: give two numbers separated by a comma, such as 1,99."
                ))
            };
            let (a, b) = t.split_once(',').ok_or_else(bad)?;
            Ok((
                a.trim().parse().map_err(|_| bad())?,
                b.trim().parse().map_err(|_| bad())?,
            ))
        };
        let stretch = match self.stretch.to_ascii_lowercase().as_str() {
            "linear" => Stretch::Linear,
            "sqrt" => Stretch::Sqrt,
            "log" => Stretch::Log,
            "asinh" => Stretch::Asinh,
            o => {
                return Err(Error::usage(format!(
                    "--stretch '{o}' is not understood: give linear, sqrt, log or asinh."
                )));
            }
        };
        let colormap = match self.colormap.to_ascii_lowercase().as_str() {
            "viridis" => ColorMap::Viridis,
            "inferno" => ColorMap::Inferno,
            "magma" => ColorMap::Magma,
            "cividis" => ColorMap::Cividis,
            "grey" | "gray" => ColorMap::Grey,
            o => {
                return Err(Error::usage(format!(
                    "--colormap '{o}' is not understood: give viridis, inferno, magma, cividis or grey."
                )));
            }
        };
        // Checked here, not only when drawing, so that --no-figure does not hide a mistake.
        let limits = match &self.range {
            Some(r) => {
                let (a, b) = pair(r, "--range")?;
                if !(a.is_finite() && b.is_finite() && a < b) {
                    return Err(Error::usage(format!(
                        "--range {r} must be two finite values, the lower first and not equal, so that the colour scale spans a range; give them as LOW,HIGH."
                    )));
                }
                Limits::Values(a, b)
            }
            None => {
                let (a, b) = pair(&self.limits, "--limits")?;
                if !((0.0..=100.0).contains(&a) && (0.0..=100.0).contains(&b) && a < b) {
                    return Err(Error::usage(format!(
                        "--limits {}: percentile limits must satisfy 0 <= low < high <= 100; give them as LOW,HIGH such as 0.5,99.5.",
                        self.limits
                    )));
                }
                Limits::Percentiles(a, b)
            }
        };
        let widest = cairn::render::MAX_WIDTH_PX;
        if !(200..=widest).contains(&width) {
            return Err(Error::usage(format!(
                "--width {width} is outside 200 to {widest} pixels; give a width in that range."
            )));
        }
        if !(self.dpi >= 30.0 && self.dpi <= 2400.0) {
            return Err(Error::usage(format!(
                "--dpi {} is outside 30 to 2400; give a resolution in that range, such as 300.",
                self.dpi
            )));
        }
        let region = match self.region.as_deref() {
            Some(r) => {
                let (region, notes) = cairn::draw::parse_region(r, map)?;
                // A region reaching past the map's edge is drawn as far as the map goes; a
                // pixel centre that is also a sky position on the map is said.
                for note in notes.iter().filter(|_| drawn).flat_map(|n| n.lines()) {
                    errln!("warning: {note}");
                }
                Some(region)
            }
            None => None,
        };
        let style = Style {
            stretch,
            limits,
            colormap,
            width_px: width,
            dpi: self.dpi,
            show_branches: self.branches,
            region,
        };
        if let Some(note) = cairn::draw::log_stretch_note(map, &style).filter(|_| drawn) {
            errln!("warning: {note}");
        }
        // A width that may be too narrow for the map beside its labels is checked by the
        // layout itself, which gives the narrowest width that works: always for a figure to
        // be drawn (a map whose sky coordinates are odd may need long axis labels at any
        // width), and for a small --width given without a figure too (not the default, so
        // that --no-figure runs where no figure fits).
        if drawn
            || (self.width.is_some() && width < 4 * cairn::render::narrowest_width_px(self.dpi))
        {
            cairn::draw::check_figure_fits(map, &style, self.width.is_some(), skippable && drawn)?;
        }
        Ok(style)
    }
}

#[derive(Args)]
struct CompareArgs {
    /// Run folders (or their structures.csv files), two or more, each with at least 3 leaves
    /// with a positive mass and radius; with --truth, one per truth table.
    #[arg(required = true, num_args = 1..)]
    runs: Vec<PathBuf>,
    /// Score a run against the truth table of the cores injected into its map
    /// (NAME-truth.csv of `cairn synth --into`, or of a plain `cairn synth`): matches.csv, completeness.csv, report.md and
    /// the completeness plot. Repeat it to pool several injections: one --truth per run,
    /// paired in order (`compare RUN1 RUN2 --truth T1 --truth T2`), each run matched against
    /// its own truth and the completeness computed over all their cores together.
    #[arg(long, value_name = "FILE")]
    truth: Vec<PathBuf>,
    /// With --truth: a run of the map before injection, with the same thresholds; injected
    /// cores within one beam FWHM of its leaves' peaks (where a leaf found may be the map's own) are left
    /// out of the completeness. Give one to serve every pooled pair (each injection into that
    /// map), or one per pair, in the order of the runs (injections into different maps).
    #[arg(long, value_name = "RUN", requires = "truth")]
    baseline: Vec<PathBuf>,
    /// A name for each run, in order [default: the folder names].
    #[arg(long, value_name = "NAME")]
    label: Vec<String>,
    /// Output folder for report.md, the CSV tables and the plots.
    #[arg(short, long, value_name = "DIR")]
    output: PathBuf,
    /// Which mass to compare: mass_excess (above the merge level) or mass (whole footprint).
    #[arg(long, default_value = "mass_excess", value_name = "COLUMN")]
    mass_column: String,
    /// Fix the lower mass of the power-law tail, such as 1Msun [default: minimise the KS distance].
    #[arg(long, value_name = "MASS", allow_hyphen_values = true)]
    mass_min: Option<String>,
    /// Use only the leaves of at least this mass, such as 1Msun, in every population for the
    /// Kolmogorov-Smirnov and Anderson-Darling tests and the mass-size fits, so catalogues of
    /// different completeness are compared above one limit [default: every leaf].
    #[arg(long, value_name = "MASS", allow_hyphen_values = true)]
    tests_above: Option<String>,
    /// Largest power-law exponent alpha of dN/dM ~ M^-alpha that the search for the tail's
    /// lower mass accepts (above 1, at most 10); raise it for steep tails.
    #[arg(
        long,
        default_value_t = 3.0,
        value_name = "ALPHA",
        allow_hyphen_values = true
    )]
    alpha_max: f64,
    /// Bootstrap resamples for the uncertainties of the tail and of the mass-size slope, and
    /// synthetic sets for the tail's goodness of fit (at most 100000). Each of them searches the
    /// tail's lower mass again unless --mass-min fixes it: a search is fast on masses with a
    /// power-law tail (under 0.1 s on 50,000 leaves) but grows with the square of the leaves on
    /// masses that depart from a power law everywhere; compare warns before a run it estimates
    /// at more than two minutes.
    #[arg(long, default_value_t = 500, allow_hyphen_values = true)]
    resamples: usize,
    /// Seed of the bootstrap.
    #[arg(long, default_value_t = 1, allow_hyphen_values = true)]
    seed: u64,
    /// Width of the mass-function bins in dex.
    #[arg(
        long,
        default_value_t = 0.2,
        value_name = "DEX",
        allow_hyphen_values = true
    )]
    bin_width: f64,
    /// Temperatures of the critical Bonnor-Ebert lines on the mass-size diagram.
    #[arg(
        long,
        default_value = "10K,20K",
        value_name = "T1,T2,...",
        allow_hyphen_values = true
    )]
    be_temperatures: String,
    /// Plot width in pixels.
    #[arg(
        long,
        default_value_t = 1200,
        value_name = "PX",
        allow_hyphen_values = true
    )]
    width: u32,
    /// Replace existing outputs.
    #[arg(long)]
    force: bool,
}

#[derive(Args)]
struct DrawArgs {
    /// The folder of a finished `cairn segment` run.
    run: PathBuf,
    /// The map, if it is no longer where the run found it.
    #[arg(long, value_name = "FILE")]
    map: Option<PathBuf>,
    /// Where to write the figures [default: the run folder, which already holds the figures
    /// `segment` drew unless it ran with --no-figure: add --force to replace them].
    #[arg(short, long, value_name = "DIR")]
    output: Option<PathBuf>,
    /// Replace existing figures.
    #[arg(long)]
    force: bool,
    #[command(flatten)]
    style: StyleArgs,
}

#[derive(Args)]
struct InspectArgs {
    /// The FITS map.
    map: PathBuf,
    #[command(flatten)]
    read: MapArgs,
    #[command(flatten)]
    physics: PhysicsArgs,
    /// Print JSON (keys documented in the README) instead of text.
    #[arg(long)]
    json: bool,
}

impl MapArgs {
    fn load_options(&self, require_unit: bool) -> Result<LoadOptions> {
        let band = match self
            .extinction_band
            .as_deref()
            .unwrap_or("V")
            .trim()
            .to_ascii_uppercase()
            .as_str()
        {
            "V" | "AV" | "A_V" => ExtinctionBand::V,
            "K" | "AK" | "A_K" => ExtinctionBand::K,
            other => {
                return Err(Error::usage(format!(
                    "--extinction-band '{other}' is not understood: give V or K."
                )));
            }
        };
        let beam = self
            .beam
            .as_deref()
            .map(Beam::parse)
            .transpose()
            .map_err(Error::usage)?;
        let wavelength = self
            .wavelength
            .as_deref()
            .map(|w| {
                units::parse_quantity(
                    w,
                    &[Dimension::Length, Dimension::Frequency],
                    "--wavelength",
                )
            })
            .transpose()
            .map_err(Error::usage)?;
        if let Some(w) = wavelength {
            // Dust continuum lies between the mid-infrared and radio waves: 1 um to 10 m.
            let metres = match w.dim {
                Dimension::Frequency => cairn::physics::constants::C / w.si,
                _ => w.si,
            };
            if !(w.si > 0.0 && (1e-6..=10.0).contains(&metres)) {
                return Err(Error::usage(format!(
                    "--wavelength {} is outside 1um to 10m (300THz to 30MHz), where dust continuum maps lie; give the map's wavelength, such as 850um.",
                    self.wavelength.as_deref().unwrap_or("")
                )));
            }
        }
        if let Some(h) = self
            .hdu
            .as_deref()
            .filter(|h| h.trim().parse::<i64>().is_ok_and(|i| i < 0))
        {
            return Err(Error::usage(format!(
                "--hdu {h} is not an HDU: they are counted from 0 (the primary); give --hdu 0, 1, ... or an EXTNAME."
            )));
        }
        Ok(LoadOptions {
            hdu: self
                .hdu
                .as_deref()
                .map(HduChoice::parse)
                .unwrap_or(HduChoice::Auto),
            plane: match self.plane {
                Some(k) if k < 0 => {
                    return Err(Error::usage(format!(
                        "--plane {k} is not a plane: they are counted from 0; give --plane 0, 1, ..."
                    )));
                }
                k => k.map(|k| k as usize),
            },
            unit: self.unit.clone(),
            band,
            band_given: self.extinction_band.is_some(),
            beam,
            wavelength,
            require_unit,
            missing_value: match self.missing_value.as_deref() {
                None => None,
                Some(t) => match t.trim().parse::<f32>() {
                    Ok(v) if v.is_finite() => Some(v),
                    _ => {
                        return Err(Error::usage(format!(
                            "--missing-value '{t}' is not a finite number: give the value that marks missing pixels, such as 0 or -999 (NaN pixels are missing already)."
                        )));
                    }
                },
            },
        })
    }

    fn noise_choice(&self, map: &map::Map) -> Result<NoiseChoice> {
        if let Some(p) = &self.noise_map {
            return Ok(NoiseChoice::Map(p.clone()));
        }
        match &self.noise {
            Some(text) => Ok(NoiseChoice::Value(
                units::parse_map_value(text, map.unit, "--noise").map_err(Error::usage)?,
            )),
            None => Ok(NoiseChoice::Estimate),
        }
    }
}

fn run_inspect(args: &InspectArgs) -> Result<()> {
    // A map whose unit cairn does not understand is still described (its unit kind is then
    // null, and the conversions say why there are none).
    let opts = args.read.load_options(false)?;
    let m = map::load(&args.map, &opts)?;
    let choice = args.read.noise_choice(&m)?;
    let mut notes = Vec::new();
    let ctx = args.physics.context(&m, &mut notes)?;
    for n in &notes {
        errln!("warning: {n}");
    }
    let mut summary = inspect::summarise_with(&m, &choice, &ctx)?;
    // A map in magnitudes whose band nothing named: the assumption is said, as A_V and A_K
    // give masses 8.9 times apart.
    if let Some(units::PixelUnit::Extinction {
        band: units::ExtinctionBand::V,
    }) = m.unit
        && args.read.extinction_band.is_none()
        && units::named_band(&m.unit_text).is_none()
    {
        summary.warnings.push(format!(
            "the unit '{}' does not name the extinction band, so the map is read as A_V; give --extinction-band K if it is of A_K",
            m.unit_text
        ));
    }
    if args.json {
        let text =
            serde_json::to_string_pretty(&summary).map_err(|e| Error::internal(e.to_string()))?;
        outln!("{text}");
    } else {
        print_out(format_args!("{}", inspect::render_text(&summary)));
    }
    Ok(())
}

/// The dust opacity law of `--opacity`, `--opacity-frequency` and `--beta`, each given one
/// replacing that part of `base`; shared by segment, inspect and synth (with `--emission` or
/// `--into`).
fn dust_opacity(
    opacity: Option<&str>,
    opacity_frequency: Option<&str>,
    beta: Option<f64>,
    base: cairn::physics::DustOpacity,
) -> Result<cairn::physics::DustOpacity> {
    let mut o = base;
    if let Some(k) = opacity {
        o.kappa0_cm2_per_g = positive(
            // Back to cm2/g as given (0.05cm2/g, not 0.05000000000000001).
            units::as_given(q(k, &[Dimension::Opacity], "--opacity")?.si * 10.0),
            &format!("--opacity {k}"),
        )?;
    }
    if let Some(f) = opacity_frequency {
        let v = q(
            f,
            &[Dimension::Frequency, Dimension::Length],
            "--opacity-frequency",
        )?;
        o.nu0_hz = positive(
            if v.dim == Dimension::Length {
                units::C_LIGHT / v.si
            } else {
                v.si
            },
            &format!("--opacity-frequency {f}"),
        )?;
        // Opacity laws are given where dust continuum is measured, as --wavelength is.
        let c = cairn::physics::constants::C;
        if !(c / 10.0..=c / 1e-6).contains(&o.nu0_hz) {
            return Err(Error::usage(format!(
                "--opacity-frequency {f} is outside 300THz to 30MHz (1um to 10m), where dust opacity laws are given; give the frequency or wavelength of the opacity, such as 1THz or 250um."
            )));
        }
    }
    if let Some(b) = beta {
        // Measured indices of interstellar dust lie near 1 to 2.5 (common practice); 0 to
        // 5 leaves room for any model and keeps the opacity law finite.
        if !(0.0..=5.0).contains(&b) {
            return Err(Error::usage(format!(
                "--beta {b} is outside 0 to 5; give the dust emissivity index, such as 1.8."
            )));
        }
        o.beta = b;
    }
    Ok(o)
}

fn pair(text: &str, dim: Dimension, what: &str) -> Result<(f64, f64)> {
    let parts: Vec<&str> = text.split(',').collect();
    if parts.len() != 2 {
        return Err(Error::usage(format!(
            "{what} '{text}' needs two values separated by a comma, such as {}.",
            match dim {
                Dimension::Mass => "0.5Msun,20Msun",
                _ => "0.02pc,0.08pc",
            }
        )));
    }
    let a = units::parse_quantity(parts[0], &[dim], what)
        .map_err(Error::usage)?
        .si;
    let b = units::parse_quantity(parts[1], &[dim], what)
        .map_err(Error::usage)?
        .si;
    Ok((a, b))
}

/// `--profile` of synth: gaussian (the default) or bonnor-ebert (also as synth's records
/// spell it, bonnor_ebert, or be).
fn core_profile(text: Option<&str>) -> Result<synth::Profile> {
    match text.map(str::to_ascii_lowercase).as_deref() {
        None | Some("gaussian") => Ok(synth::Profile::Gaussian),
        Some("bonnor-ebert") | Some("bonnor_ebert") | Some("be") => {
            Ok(synth::Profile::critical_bonnor_ebert())
        }
        Some(other) => Err(Error::usage(format!(
            "--profile '{other}' is not understood: give gaussian or bonnor-ebert."
        ))),
    }
}

/// The specification of a plain `synth` run: the `--spec` file (or the defaults), each option
/// given replacing its own field and nothing else. An option that describes something the map
/// does not have (a temperature without `--emission`, core options without random cores) is
/// refused rather than dropped. The random cores' margin from the edges is recomputed for the
/// new map when the spec's was the default one for its own parameters; a margin set by hand
/// in the file is kept.
fn synth_spec(a: &SynthArgs, notes: &mut Vec<String>) -> Result<synth::SynthSpec> {
    let mut spec = match &a.spec {
        Some(p) => {
            if let Some(e) = cairn::error::not_text(
                p,
                "a synth specification (a JSON text file)",
                "give --spec the NAME-spec.json that cairn synth wrote, or one written in its form",
            ) {
                return Err(e);
            }
            let text = std::fs::read_to_string(p)
                .map_err(|e| Error::input(p, format!("cannot be read ({e}).")))?;
            synth::read_spec(&text).map_err(|e| Error::input(p, format!("{}.", e.0)))?
        }
        None => synth::SynthSpec::default(),
    };
    let base = spec.clone();
    // What the values being refined belong to, for messages.
    let source = match &a.spec {
        Some(p) => format!("the spec {}", p.display()),
        None => "this map".to_string(),
    };
    if let Some(size) = &a.size {
        let bad = || {
            Error::usage(format!(
                "--size '{size}' is not understood: give N or NXxNY, such as 512 or 600x400."
            ))
        };
        let (nx, ny) = match size.split_once(['x', 'X']) {
            Some((x, y)) => (
                x.trim().parse().map_err(|_| bad())?,
                y.trim().parse().map_err(|_| bad())?,
            ),
            None => {
                let n: usize = size.trim().parse().map_err(|_| bad())?;
                (n, n)
            }
        };
        spec.nx = nx;
        spec.ny = ny;
    }
    if let Some(p) = &a.pixel {
        spec.pixel_arcsec = q(p, &[Dimension::Angle], "--pixel")?.si / units::ARCSEC;
    }
    if let Some(f) = &a.frame {
        spec.frame = match f.to_ascii_lowercase().as_str() {
            "icrs" => synth::Frame::Icrs,
            "fk5" => synth::Frame::Fk5,
            "galactic" | "gal" => synth::Frame::Galactic,
            _ => {
                return Err(Error::usage(format!(
                    "--frame '{f}' is not understood: give icrs, fk5 or galactic."
                )));
            }
        };
    }
    if let Some(c) = &a.centre {
        let bad = || {
            Error::usage(format!(
                "--centre '{c}' is not understood: give lon,lat in degrees, such as 201.375,-31.625, or sexagesimally, such as 13h25m30s,-31d37m30s or 13:25:30,-31:37:30 (a longitude in hours, with letters or colons, on an equatorial frame only)."
            ))
        };
        let (lon, lat) = c.split_once(',').ok_or_else(bad)?;
        // Hours for the longitude of an equatorial frame only (the frame as set above).
        let hours = !matches!(spec.frame, synth::Frame::Galactic);
        spec.centre_lon_deg = cairn::angles::parse_longitude(lon, hours).ok_or_else(bad)?;
        spec.centre_lat_deg = cairn::angles::parse_latitude(lat).ok_or_else(bad)?;
    }
    if let Some(d) = &a.distance {
        spec.distance_pc =
            units::as_given(q(d, &[Dimension::Length], "--distance")?.si / units::PARSEC);
    }
    if let Some(b) = &a.beam {
        spec.beam_fwhm_arcsec = q(b, &[Dimension::Angle], "--beam")?.si / units::ARCSEC;
    }
    if a.no_background {
        spec.background = None;
    } else if a.background.is_some() || a.background_width.is_some() || a.background_index.is_some()
    {
        let mut bg = match spec.background {
            Some(bg) => bg,
            // A background added to a spec without one takes the defaults for what is not given.
            None if a.background.is_some() => synth::Background::default(),
            None => {
                let option = if a.background_width.is_some() {
                    "--background-width"
                } else {
                    "--background-index"
                };
                return Err(Error::usage(format!(
                    "{option} changes the background, but {source} has none (\"background\": null): give --background (its mean column density, such as 3e21cm-2) with it to add one, or leave it out."
                )));
            }
        };
        if let Some(t) = &a.background {
            bg.mean_column_cm2 = q(t, &[Dimension::ColumnDensity], "--background")?.in_unit(1e4);
        }
        if let Some(w) = a.background_width {
            bg.sigma_ln = w;
        }
        if let Some(i) = a.background_index {
            bg.spectral_index = i;
        }
        spec.background = Some(bg);
    }
    synth_population(a, &base, &mut spec, &source, notes)?;
    synth_output(a, &mut spec, &source)?;
    if let Some(n) = &a.noise {
        // The pixel unit of each emission unit synth makes.
        let emission = |u: synth::EmissionUnit| match u {
            synth::EmissionUnit::MJyPerSr => units::PixelUnit::SurfaceBrightness {
                to_si: 1e6 * units::JANSKY,
            },
            synth::EmissionUnit::JyPerBeam => units::PixelUnit::FluxPerBeam {
                to_si: units::JANSKY,
            },
        };
        let unit = match &spec.output {
            synth::Output::ColumnDensity => units::PixelUnit::ColumnDensity { to_si: 1e4 },
            synth::Output::DustEmission { unit, .. } => emission(*unit),
        };
        spec.noise_rms = units::parse_map_value(n, Some(unit), "--noise").map_err(|e| {
            // A noise in the other emission unit: the map can be made in that unit instead.
            let other = match &spec.output {
                synth::Output::DustEmission {
                    unit: synth::EmissionUnit::MJyPerSr,
                    ..
                } => Some(synth::EmissionUnit::JyPerBeam),
                synth::Output::DustEmission { .. } => Some(synth::EmissionUnit::MJyPerSr),
                synth::Output::ColumnDensity => None,
            };
            let fits = |u: &synth::EmissionUnit| {
                units::parse_map_value(n, Some(emission(*u)), "--noise").is_ok()
            };
            match other.filter(fits).map(|u| u.text()) {
                Some(name) => Error::usage(format!(
                    "{}; or make the map in {name} with --emission-unit {name}.",
                    e.trim_end_matches('.')
                )),
                None => Error::usage(e),
            }
        })?;
        // A bare number far below the background (0.004 meant in another unit, on a map of
        // column densities near 3e21): noise that changes nothing is said.
        if let (Some(bg), synth::Output::ColumnDensity) = (&spec.background, &spec.output)
            && spec.noise_rms > 0.0
            && spec.noise_rms < 1e-6 * bg.mean_column_cm2
        {
            notes.push(format!(
                "--noise {} is read in cm-2, a millionth of the background ({:e} cm-2) or less, so it adds no visible noise; give it as a column density, such as 1e20cm-2",
                n.trim(),
                bg.mean_column_cm2
            ));
        }
    }
    if let Some(s) = a.seed {
        spec.seed = s;
    }
    if let Some(m) = a.mu_h2 {
        spec.mu_h2 = m;
    }
    Ok(spec)
}

/// The random cores of a plain `synth` run: `--cores` sets their number (0 drops them), and
/// `--core-mass`, `--core-radius`, `--core-mass-index` and `--profile` each replace their own
/// part of the population, the spec's or, when there is none, the defaults'. Then the margin
/// they keep from the edges (see [`synth_spec`]).
fn synth_population(
    a: &SynthArgs,
    base: &synth::SynthSpec,
    spec: &mut synth::SynthSpec,
    source: &str,
    notes: &mut Vec<String>,
) -> Result<()> {
    let core_option = [
        (a.core_mass.is_some(), "--core-mass"),
        (a.core_radius.is_some(), "--core-radius"),
        (a.core_mass_index.is_some(), "--core-mass-index"),
        (a.profile.is_some(), "--profile"),
    ]
    .into_iter()
    .find(|(given, _)| *given)
    .map(|(_, option)| option);
    let mut population = match (a.cores, spec.population) {
        (Some(0), _) => {
            if let Some(option) = core_option {
                return Err(Error::usage(format!(
                    "{option} describes the random cores, but --cores 0 asks for none: give --cores N (at least 1) with it, or leave it out."
                )));
            }
            // No random cores: none need room, and a spec's population is dropped.
            spec.population = None;
            return Ok(());
        }
        (Some(n), Some(p)) => synth::CorePopulation { count: n, ..p },
        (Some(n), None) => synth::CorePopulation {
            count: n,
            mass_min_msun: 0.5,
            mass_max_msun: 20.0,
            mass_index: 2.35,
            radius_min_pc: 0.02,
            radius_max_pc: 0.08,
            profile: synth::Profile::Gaussian,
            margin_px: synth::MIN_MARGIN_PX,
        },
        (None, Some(p)) => p,
        (None, None) => {
            if let Some(option) = core_option {
                let which = if a.spec.is_some() {
                    format!(
                        "{source} has no random population (\"population\": null; the profiles of cores placed by hand are set in its \"cores\")"
                    )
                } else {
                    "none are asked for".to_string()
                };
                return Err(Error::usage(format!(
                    "{option} describes the random cores, but {which}: give --cores N (such as --cores 30) with it, or leave it out."
                )));
            }
            return Ok(());
        }
    };
    if let Some(t) = &a.core_mass {
        let (m0, m1) = pair(t, Dimension::Mass, "--core-mass")?;
        population.mass_min_msun = m0 / units::M_SUN;
        population.mass_max_msun = m1 / units::M_SUN;
    }
    if let Some(t) = &a.core_radius {
        let (r0, r1) = pair(t, Dimension::Length, "--core-radius")?;
        population.radius_min_pc = r0 / units::PARSEC;
        population.radius_max_pc = r1 / units::PARSEC;
    }
    if let Some(i) = a.core_mass_index {
        population.mass_index = i;
    }
    if a.profile.is_some() {
        population.profile = core_profile(a.profile.as_deref())?;
    }
    // Random cores keep the widest one's reach from the edges, so that the beam carries none
    // of their light off the map (as far as the map leaves room). A spec's margin is taken as
    // that default when it equals the default for the spec's own map and cores, and is then
    // recomputed for the map being made; any other margin was set by hand, and is kept.
    let (margin, reach) =
        synth::default_margin_px(spec, population.radius_max_pc, population.profile);
    let hand_set = base.population.and_then(|p| {
        let (own, _) = synth::default_margin_px(base, p.radius_max_pc, p.profile);
        (p.margin_px != own).then_some((p.margin_px, own))
    });
    match hand_set {
        Some((kept, own)) => {
            if margin != own {
                notes.push(format!(
                    "{source} keeps its random cores {kept} pixels from the edges (population.margin_px, not the default of {own} for its own map and cores, so set by hand), though the default for the map being made is {margin}; edit margin_px in the file to change it"
                ));
            }
        }
        None => {
            if margin < reach {
                notes.push(format!(
                    "a map of {} x {} pixels is too small to keep the random cores {reach} pixels (the widest core's reach with the beam) from its edges; they keep {margin}, so a core near an edge may be cut by it (its mass put on the pixels inside, which changes its profile and peak, and part of its light carried off the map by the beam); give a larger --size or a smaller --core-radius to avoid it",
                    spec.nx, spec.ny
                ));
            }
            population.margin_px = margin;
        }
    }
    spec.population = Some(population);
    Ok(())
}

/// What a plain `synth` run makes: `--emission` sets the wavelength of an emission map (keeping
/// an emission spec's temperature, unit and opacity, or making a column-density spec's map one
/// of emission with the defaults), and `--temperature`, `--emission-unit`, `--opacity`,
/// `--opacity-frequency` and `--beta` each replace their own part of it. A change of unit that
/// would leave a spec's noise level in the old unit is refused unless `--noise` is given.
fn synth_output(a: &SynthArgs, spec: &mut synth::SynthSpec, source: &str) -> Result<()> {
    let new_unit = match a.emission_unit.as_deref() {
        None => None,
        Some("MJy/sr") => Some(synth::EmissionUnit::MJyPerSr),
        Some("Jy/beam") => Some(synth::EmissionUnit::JyPerBeam),
        Some(u) => {
            return Err(Error::usage(format!(
                "--emission-unit '{u}' is not understood: give MJy/sr or Jy/beam."
            )));
        }
    };
    let noise_kept = spec.noise_rms != 0.0 && a.noise.is_none();
    // The spec's noise level as a reader would write it (1.5e20, 0.004).
    let noise = if (1e-3..1e5).contains(&spec.noise_rms.abs()) {
        spec.noise_rms.to_string()
    } else {
        format!("{:e}", spec.noise_rms)
    };
    let map_of = match &a.spec {
        Some(p) => format!("the map of the spec {}", p.display()),
        None => "this map".to_string(),
    };
    if let Some(w) = &a.emission {
        let wl = q(w, &[Dimension::Length], "--emission")?.si;
        match &mut spec.output {
            synth::Output::DustEmission { wavelength_um, .. } => {
                *wavelength_um = units::as_given(wl * 1e6)
            }
            synth::Output::ColumnDensity => {
                let unit = new_unit.unwrap_or(synth::EmissionUnit::MJyPerSr);
                if noise_kept {
                    return Err(Error::usage(format!(
                        "--emission {w} makes an emission map in {}, but the noise_rms {noise} of {source} is a column density in cm-2: give --noise in {} with it (--noise 0 for none).",
                        unit.text(),
                        unit.text()
                    )));
                }
                spec.output = synth::Output::DustEmission {
                    wavelength_um: units::as_given(wl * 1e6),
                    temperature_k: 15.0,
                    unit,
                    opacity: cairn::physics::DustOpacity::default(),
                };
            }
        }
    }
    let emission_option = [
        (a.temperature.is_some(), "--temperature"),
        (a.emission_unit.is_some(), "--emission-unit"),
        (a.opacity.is_some(), "--opacity"),
        (a.opacity_frequency.is_some(), "--opacity-frequency"),
        (a.beta.is_some(), "--beta"),
    ]
    .into_iter()
    .find(|(given, _)| *given)
    .map(|(_, option)| option);
    match &mut spec.output {
        synth::Output::DustEmission {
            temperature_k,
            unit,
            opacity,
            ..
        } => {
            if let Some(t) = &a.temperature {
                *temperature_k = q(t, &[Dimension::Temperature], "--temperature")?.si;
            }
            if let Some(u) = new_unit
                && u != *unit
            {
                if noise_kept {
                    return Err(Error::usage(format!(
                        "--emission-unit {} changes the unit of {source} from {}, but its noise_rms {noise} is in {}: give --noise in {} with it (--noise 0 for none).",
                        u.text(),
                        unit.text(),
                        unit.text(),
                        u.text()
                    )));
                }
                *unit = u;
            }
            *opacity = dust_opacity(
                a.opacity.as_deref(),
                a.opacity_frequency.as_deref(),
                a.beta,
                *opacity,
            )?;
        }
        synth::Output::ColumnDensity => {
            if let Some(option) = emission_option {
                let what = match option {
                    "--temperature" => "the dust temperature",
                    "--emission-unit" => "the unit",
                    _ => "the dust opacity",
                };
                return Err(Error::usage(format!(
                    "{option} sets {what} of an emission map, but {map_of} is of column density: give --emission (such as --emission 850um) with it, or leave it out."
                )));
            }
        }
    }
    Ok(())
}

fn run_synth(a: &SynthArgs, quiet: bool) -> Result<()> {
    synth::check_name(&a.name).map_err(|e| Error::usage(format!("{}.", e.0)))?;
    if let Some(m) = &a.into {
        return run_inject(a, m, quiet);
    }
    let mut notes = Vec::new();
    let spec = synth_spec(a, &mut notes)?;
    // Everything about the specification is checked before the output folder is made.
    synth::check(&spec)
        .map_err(|e| Error::usage(format!("cannot make this synthetic map: {}.", e.0)))?;
    for n in &notes {
        errln!("warning: {n}.");
    }
    let names = [
        format!("{}.fits", a.name),
        format!("{}-truth.csv", a.name),
        format!("{}-spec.json", a.name),
    ];
    if let Some(spec_file) = &a.spec {
        output::refuse_inputs_as_outputs(&a.output, &names, &[spec_file])?;
    }
    let outputs = output::Outputs::plan(&a.output, &names, a.force)?;
    let bar = progress_bar(quiet, spec.nx * spec.ny);
    let map = synth::generate_with_progress(&spec, &|stage, f| {
        if let Some(b) = &bar {
            b.set_message(stage.to_string());
            b.set_position((f * 1000.0) as u64);
        }
    })
    .map_err(|e| Error::usage(format!("cannot make this synthetic map: {}.", e.0)))?;
    drop(bar);
    fits_write::write_image_f32(&outputs.temp(&names[0]), map.data.view(), &map.header, true)
        .map_err(|e| Error::output(&a.output.join(&names[0]), e.0))?;
    // The truth names its map by SHA-256, so that `compare --truth` can check a run is of it.
    let sha = cairn::segment::sha256_file(&outputs.temp(&names[0]))?;
    synth::write_truth_csv_with_notes(
        &outputs.temp(&names[1]),
        &map.truth,
        &[cairn::completeness::map_note(&names[0], &sha)],
    )
    .map_err(|e| {
        Error::output(
            &a.output.join(&names[1]),
            format!("cannot be written ({e})."),
        )
    })?;
    let spec_text =
        serde_json::to_string_pretty(&spec).map_err(|e| Error::internal(e.to_string()))? + "\n";
    output::write_bytes(&outputs.temp(&names[2]), spec_text.as_bytes())?;
    let written = outputs.commit()?;
    if !quiet {
        for p in written {
            errln!("wrote {}", p.display());
        }
        errln!(
            "{} injected",
            match map.truth.len() {
                1 => "1 core".to_string(),
                n => format!("{n} cores"),
            }
        );
    }
    Ok(())
}

/// `cairn synth --into MAP`: cores of known mass injected into a real map.
fn run_inject(a: &SynthArgs, path: &std::path::Path, quiet: bool) -> Result<()> {
    let read = MapArgs {
        hdu: a.hdu.clone(),
        plane: a.plane,
        unit: a.unit.clone(),
        extinction_band: a.extinction_band.clone(),
        beam: a.beam.clone(),
        wavelength: a.wavelength.clone(),
        missing_value: a.missing_value.clone(),
        noise: None,
        noise_map: None,
    };
    let physics = PhysicsArgs {
        distance: a.distance.clone(),
        temperature: a.temperature.clone(),
        temperature_map: a.temperature_map.clone(),
        opacity: a.opacity.clone(),
        opacity_frequency: a.opacity_frequency.clone(),
        beta: a.beta,
        mu_h2: a.mu_h2,
        mu_particle: None,
        column_per_av: a.column_per_av.clone(),
        av_per_ak: a.av_per_ak,
    };
    let opts = read.load_options(true)?;
    // The options are checked before the map is read: the synth options that describe the
    // cores, as `synth` checks them, and the physics.
    let n = a.cores.unwrap_or(0);
    if n == 0 {
        return Err(Error::usage(
            "--into needs --cores, at least 1; give the number of cores to inject, such as --cores 200.",
        ));
    }
    let (m0, m1) = match &a.core_mass {
        Some(t) => pair(t, Dimension::Mass, "--core-mass")?,
        None => (0.5 * units::M_SUN, 20.0 * units::M_SUN),
    };
    let (r0, r1) = match &a.core_radius {
        Some(t) => pair(t, Dimension::Length, "--core-radius")?,
        None => (0.02 * units::PARSEC, 0.08 * units::PARSEC),
    };
    let profile = core_profile(a.profile.as_deref())?;
    let min_separation_arcsec = a
        .min_separation
        .as_deref()
        .map(|t| {
            units::parse_quantity(t, &[Dimension::Angle], "--min-separation")
                .map(|q| q.si / units::ARCSEC)
        })
        .transpose()
        .map_err(Error::usage)?;
    if let Some(s) = min_separation_arcsec
        && !(s >= 0.0 && s.is_finite())
    {
        return Err(Error::usage(format!(
            "--min-separation {} must be an angle of zero or more, such as 40arcsec.",
            a.min_separation.as_deref().unwrap_or("")
        )));
    }
    let mut m = map::load(path, &opts)?;
    // Cores of known mass need a unit that converts to column density; the load's warning
    // about a unit without conversion (structure only) does not apply to an injection.
    if m.unit == Some(units::PixelUnit::Other) {
        return Err(Error::input(
            path,
            format!(
                "is in {}, which has no conversion to column density, so cores of known mass cannot be injected into it; inject into a map of dust emission, column density or extinction (give --unit if the header's unit is wrong).",
                if m.unit_text.is_empty() {
                    "no unit".to_string()
                } else {
                    format!("'{}'", m.unit_text)
                }
            ),
        ));
    }
    let mut notes = Vec::new();
    let ctx = physics.context(&m, &mut notes)?;
    for n in &notes {
        errln!("warning: {n}");
    }
    let distance_pc = units::as_given(ctx.distance_m.unwrap_or(f64::NAN) / units::PARSEC);
    let inject_opts = cairn::inject::InjectOptions {
        population: synth::CorePopulation {
            count: n,
            mass_min_msun: m0 / units::M_SUN,
            mass_max_msun: m1 / units::M_SUN,
            mass_index: a.core_mass_index.unwrap_or(2.35),
            radius_min_pc: r0 / units::PARSEC,
            radius_max_pc: r1 / units::PARSEC,
            profile,
            margin_px: 0.0,
        },
        distance_pc,
        seed: a.seed.unwrap_or(1),
        min_separation_arcsec,
    };
    let injected = cairn::inject::inject(&mut m, &ctx, &inject_opts)?;
    // Warnings on stderr with --quiet too, as every command gives them (after the checks of
    // the injection, so that a refusal stays one sentence).
    for w in &m.warnings {
        errln!("warning: {w}");
    }
    let names = [
        format!("{}.fits", a.name),
        format!("{}-truth.csv", a.name),
        format!("{}-spec.json", a.name),
    ];
    let inputs: Vec<&std::path::Path> = std::iter::once(path)
        .chain(a.temperature_map.as_deref())
        .collect();
    output::refuse_inputs_as_outputs(&a.output, &names, &inputs)?;
    let outputs = output::Outputs::plan(&a.output, &names, a.force)?;
    let fits_temp = outputs.temp(&names[0]);
    fits_write::write_image_f32(&fits_temp, injected.data.view(), &injected.header, true)
        .map_err(|e| Error::output(&a.output.join(&names[0]), e.0))?;
    let sha = cairn::segment::sha256_file(&fits_temp)?;
    let input_sha = cairn::segment::sha256_file(path)?;
    synth::write_truth_csv_with_notes(
        &outputs.temp(&names[1]),
        &injected.truth,
        &[cairn::completeness::map_note(&names[0], &sha)],
    )
    .map_err(|e| {
        Error::output(
            &a.output.join(&names[1]),
            format!("cannot be written ({e})."),
        )
    })?;
    let record = serde_json::json!({
        "cairn_version": env!("CARGO_PKG_VERSION"),
        "injected_map": { "file": names[0], "sha256": sha },
        "input": {
            "path": path.to_string_lossy(),
            "sha256": input_sha,
            "hdu": m.hdu_index,
            "plane": m.plane,
            "unit": m.unit_text,
            "unit_kind": m.unit.map(|u| u.kind_name()),
            "beam": m.beam,
            "wavelength_m": m.wavelength_m,
        },
        "distance_pc": inject_opts.distance_pc,
        "seed": inject_opts.seed,
        "population": synth::CorePopulation { margin_px: injected.margin_px, ..inject_opts.population },
        "min_separation_arcsec": injected.min_separation_arcsec,
        "temperature_k": match &ctx.temperature_k { Some(cairn::score::Field::Uniform(t)) => Some(*t), _ => None },
        "temperature_map": match &a.temperature_map {
            Some(p) => serde_json::json!({
                "path": std::fs::canonicalize(p).unwrap_or_else(|_| p.clone()).to_string_lossy(),
                "sha256": cairn::segment::sha256_file(p)?,
                "values_sha256": ctx.temperature_k.as_ref().and_then(|t| t.values_sha256()),
            }),
            None => serde_json::Value::Null,
        },
        "opacity": ctx.opacity,
        "nh2_per_av_cm2": units::as_given(ctx.nh2_per_av_m2 * 1e-4),
        "av_per_ak": ctx.av_per_ak,
        "mu_h2": ctx.mu_h2,
    });
    let text =
        serde_json::to_string_pretty(&record).map_err(|e| Error::internal(e.to_string()))? + "\n";
    output::write_bytes(&outputs.temp(&names[2]), text.as_bytes())?;
    let written = outputs.commit()?;
    if !quiet {
        for p in written {
            errln!("wrote {}", p.display());
        }
        errln!(
            "{} injected into {}",
            match injected.truth.len() {
                1 => "1 core".to_string(),
                n => format!("{n} cores"),
            },
            path.display()
        );
    }
    Ok(())
}

/// `cairn compare RUN... --truth NAME-truth.csv...`: runs scored against injected cores, each
/// run against the truth table given in the same place, pooled when there are several.
fn run_completeness(a: &CompareArgs, quiet: bool) -> Result<()> {
    use cairn::completeness;
    if a.runs.len() != a.truth.len() {
        return Err(Error::usage(format!(
            "--truth pairs each run, in order, with the truth table of the cores injected into its map, but {} {} and {} truth {} were given; give one run folder (or its structures.csv) per --truth.",
            a.runs.len(),
            if a.runs.len() == 1 { "run" } else { "runs" },
            a.truth.len(),
            if a.truth.len() == 1 {
                "table"
            } else {
                "tables"
            }
        )));
    }
    if !(a.bin_width >= 0.01 && a.bin_width <= 2.0) {
        return Err(Error::usage(format!(
            "--bin-width {} is outside 0.01 to 2 dex; give a bin width in that range.",
            a.bin_width
        )));
    }
    let pooled_sets = a.runs.len() > 1;
    // Every pair is read and checked before anything is said or written.
    let mut pairs = Vec::new();
    for (run_path, truth_path) in a.runs.iter().zip(&a.truth) {
        let truth = completeness::read_truth(truth_path)?;
        let run = completeness::read_run(run_path)?;
        completeness::check_same_map(&truth, &run)?;
        pairs.push((truth, run));
    }
    let truths: Vec<&completeness::Truth> = pairs.iter().map(|p| &p.0).collect();
    completeness::check_distinct(&truths)?;
    // One baseline serves every pair (each injection into the same map), or one per pair in
    // order (injections into different maps); each is checked against its pair.
    if a.baseline.len() > 1 && a.baseline.len() != a.runs.len() {
        return Err(Error::usage(format!(
            "{} --baseline runs were given for {} runs; give one baseline for every pair (injections into one map) or one per run, in the runs' order.",
            a.baseline.len(),
            a.runs.len()
        )));
    }
    let baselines = a
        .baseline
        .iter()
        .map(|b| completeness::read_baseline(b))
        .collect::<cairn::error::Result<Vec<_>>>()?;
    let baseline_of = |k: usize| baselines.get(k).or(baselines.first());
    let mut baseline_differences = Vec::new();
    for (k, (truth, run)) in pairs.iter().enumerate() {
        baseline_differences.push(match baseline_of(k) {
            Some(b) => completeness::check_baseline(truth, run, b).map_err(|mut e| {
                // One baseline for pooled injections into different maps: say the way out.
                if pooled_sets && baselines.len() == 1 {
                    e.message = e.message.replace(
                        "give --baseline a run of the map before injection.",
                        "give --baseline a run of the map before injection, or one --baseline per run, in the runs' order, for injections into different maps.",
                    );
                }
                e
            })?,
            None => Vec::new(),
        });
    }
    let scorings: Vec<completeness::Scoring> = pairs
        .iter()
        .zip(baseline_differences)
        .enumerate()
        .map(|(k, ((truth, run), differences))| {
            let mut s = completeness::score_with_baseline(truth, run, baseline_of(k), a.bin_width);
            s.baseline_differences = differences;
            s
        })
        .collect();
    let parts: Vec<completeness::Part> = pairs
        .iter()
        .zip(&scorings)
        .map(|((truth, run), s)| (truth, run, s))
        .collect();
    let s = if pooled_sets {
        completeness::pool(&parts, a.bin_width)
    } else {
        scorings[0].clone()
    };
    let injected = s.matches.len();
    if s.with_baseline && s.counted().next().is_none() {
        return Err(Error::input(
            a.baseline.first().unwrap_or(&a.truth[0]),
            format!(
                "has leaves within one beam FWHM ({} arcsec) of every one of the {injected} injected cores, so none is left to score; inject cores away from the map's structures or leave out --baseline.",
                units::tidy(s.radius_arcsec)
            ),
        ));
    }
    if a.width < 600 || a.width > 20000 {
        return Err(Error::usage(format!(
            "--width {} is outside 600 to 20000 pixels; give a plot width in that range.",
            a.width
        )));
    }
    let runs: Vec<&completeness::Run> = pairs.iter().map(|p| &p.1).collect();
    let run_differences = completeness::run_differences(&runs);
    let plot = completeness::plot(&s);
    let plot_err =
        |e: cairn::render::RenderError| Error::usage(format!("cannot draw the plot: {e}."));
    let (matches, report) = if pooled_sets {
        (
            completeness::pooled_matches_table(&parts),
            completeness::pooled_report(&parts, &s, &run_differences),
        )
    } else {
        let (truth, run, s) = parts[0];
        (
            completeness::matches_table(truth, run, s),
            completeness::report(truth, run, s),
        )
    };
    let files: Vec<(String, Vec<u8>)> = vec![
        (
            "completeness.png".into(),
            cairn::render::plot::plot_png(&plot, a.width, 300.0).map_err(plot_err)?,
        ),
        (
            "completeness.svg".into(),
            cairn::render::plot::plot_svg(&plot, a.width, 300.0)
                .map_err(plot_err)?
                .into_bytes(),
        ),
        (
            "completeness.pdf".into(),
            cairn::render::plot::plot_pdf(&plot, a.width, 300.0).map_err(plot_err)?,
        ),
        ("matches.csv".into(), matches.to_csv().into_bytes()),
        (
            "completeness.csv".into(),
            completeness::completeness_table(&s).to_csv().into_bytes(),
        ),
        ("report.md".into(), report.into_bytes()),
    ];
    let names: Vec<String> = files.iter().map(|(n, _)| n.clone()).collect();
    let inputs: Vec<&std::path::Path> = a
        .runs
        .iter()
        .chain(&a.truth)
        .map(PathBuf::as_path)
        .chain(a.baseline.iter().map(PathBuf::as_path))
        .collect();
    output::refuse_inputs_as_outputs(&a.output, &names, &inputs)?;
    let outputs = output::Outputs::plan(&a.output, &names, a.force)?;
    // Printed with --quiet too: the mass ratios are not what they seem without them.
    for (k, (truth, run, s)) in parts.iter().enumerate() {
        let set = if pooled_sets {
            format!("set {}: ", k + 1)
        } else {
            String::new()
        };
        for d in completeness::assumption_differences(truth, run)
            .iter()
            .chain(&s.baseline_differences)
        {
            errln!("warning: {set}{d}");
        }
    }
    for d in &run_differences {
        errln!("warning: {d}");
    }
    for (n, bytes) in &files {
        output::write_bytes(&outputs.temp(n), bytes)?;
    }
    let written = outputs.commit()?;
    let counted: Vec<usize> = s.counted().collect();
    let k = counted.iter().filter(|&&i| s.matches[i].is_some()).count();
    outln!(
        "{}{k} of {} injected cores{} recovered; {}; {}; median mass_excess / true mass {}",
        if pooled_sets {
            format!("pooled over {} injections: ", parts.len())
        } else {
            String::new()
        },
        counted.len(),
        if s.with_baseline {
            format!(
                " away from the map's own leaves ({} more, placed on them, not counted)",
                injected - counted.len()
            )
        } else {
            String::new()
        },
        match s.limit_90 {
            Some(m) if s.limit_at_lowest => {
                format!("90% complete down to the least injected mass, {m:.3} Msun")
            }
            Some(m) => format!(
                "90% complete above {m:.3} Msun ({} of them at or above it)",
                s.n_above_limit
            ),
            None => "never 90% complete".into(),
        },
        match &s.logistic {
            Ok(f) => format!(
                "unbinned logistic fit: 90% at {} Msun (+-{:.3} dex){}{}",
                cairn::completeness::fmt_msun(f.m90()),
                f.log10_m90_err,
                if f.m90_extrapolated() {
                    ", extrapolated beyond the injected masses"
                } else {
                    ""
                },
                if f.weak() {
                    ", a weak fit (slope less than twice its error)"
                } else {
                    ""
                }
            ),
            Err(_) => "no unbinned logistic fit (see report.md)".into(),
        },
        if s.median_excess_ratio.is_finite() {
            format!("{:.3}", s.median_excess_ratio)
        } else {
            "n/a".into()
        }
    );
    if !quiet {
        for p in written {
            errln!("wrote {}", p.display());
        }
    }
    Ok(())
}

fn run_segment(a: &SegmentArgs, quiet: bool) -> Result<()> {
    use cairn::segment;
    let opts = a.read.load_options(true)?;
    let mut m = map::load(&a.map, &opts)?;
    if let Some(r) = &a.common_resolution {
        let res = units::parse_quantity(r, &[Dimension::Length], "--common-resolution")
            .map_err(Error::usage)?
            .si;
        // A length a beam can have: above a micro-parsec and below a kiloparsec.
        if !(res > 1e-6 * units::PARSEC && res < 1e3 * units::PARSEC) {
            return Err(Error::usage(format!(
                "--common-resolution '{r}' is not a resolution a map can be smoothed to: give a length between a micro-parsec and a kiloparsec, such as 0.05pc."
            )));
        }
        let d = a
            .physics
            .distance
            .as_deref()
            .ok_or_else(|| {
                Error::usage(
                    "--common-resolution needs --distance to turn the resolution into an angle; give --distance, such as 300pc.",
                )
            })
            .and_then(|d| {
                units::parse_quantity(d, &[Dimension::Length], "--distance").map_err(Error::usage)
            })?
            .si;
        if a.read.noise.is_some() || a.read.noise_map.is_some() {
            return Err(Error::usage(
                "--common-resolution changes the noise, which is then estimated afresh: leave out --noise and --noise-map.",
            ));
        }
        m = cairn::resolution::to_common_resolution(&m, res, d)?;
        // What was done, said as the run's progress is (not a warning).
        if let Some(said) = cairn::resolution::describe(&m).filter(|_| !quiet) {
            errln!("{said}");
        }
    }
    // A beam larger than the map is refused before any warning, so that the refusal is one
    // sentence (segment::run refuses it too).
    if let Some(why) = cairn::inspect::beam_too_large(&m) {
        return Err(Error::usage(format!("{why}.")));
    }
    // Warnings are printed with --quiet too, as its help says.
    for w in &m.warnings {
        errln!("warning: {w}");
    }
    let from = a
        .thresholds_from
        .as_deref()
        .map(|r| {
            let taken = [
                a.floor.is_none(),
                a.prominence.is_none(),
                a.min_area.is_none(),
            ];
            segment::thresholds_from_run(r, &m, taken)
        })
        .transpose()?;
    for w in from.iter().flat_map(|f| &f.warnings) {
        errln!("warning: {w}");
    }
    let connectivity = match a.connectivity.as_deref().map(str::trim) {
        Some("4") => cairn::hierarchy::Connectivity::Four,
        Some("8") => cairn::hierarchy::Connectivity::Eight,
        Some(other) => {
            return Err(Error::usage(format!(
                "--connectivity '{other}' is not understood: give 4 or 8."
            )));
        }
        None => from
            .as_ref()
            .map_or(cairn::hierarchy::Connectivity::Eight, |f| f.connectivity),
    };
    // The auxiliary maps and the earlier run's record must not be among the files the run
    // replaces (the map and the noise map are checked by the library).
    let aux: Vec<&std::path::Path> = [
        a.physics.temperature_map.as_deref(),
        a.motion.sigma_nt_map.as_deref(),
        from.as_ref().map(|f| f.record.as_path()),
    ]
    .into_iter()
    .flatten()
    .collect();
    output::refuse_inputs_as_outputs(&a.output, &segment::names::ALL.map(String::from), &aux)?;
    let physics = {
        let mut notes = Vec::new();
        let mut c = a.physics.context(&m, &mut notes)?;
        a.motion.apply(&m, &mut c, &mut notes)?;
        for n in &notes {
            errln!("warning: {n}");
        }
        // They change the masses: the run records them (run record, catalogue notes), as it
        // does those on thresholds taken from another run.
        c.warnings = notes;
        c.warnings
            .extend(from.iter().flat_map(|f| f.warnings.iter().cloned()));
        c
    };
    // A threshold not given takes the earlier run's, said as coming from it in the records.
    let map_unit = match segment::map_unit(&m) {
        u if u.is_empty() => u,
        u => format!(" {u}"),
    };
    let from_text = |f: &segment::RunThresholds, v: f64, unit: &str| {
        format!(
            "{}{unit} (from {})",
            cairn::table::fmt_f64(v),
            f.record.display()
        )
    };
    let level = |text: &Option<String>, what: &str| {
        text.as_deref()
            .map(|t| segment::parse_level(t, &m, &physics, opts.band, what))
            .transpose()
    };
    let so = segment::SegmentOptions {
        floor: level(&a.floor, "--floor")?
            .or(from.as_ref().map(|f| segment::Level::Value(f.floor))),
        prominence: level(&a.prominence, "--prominence")?
            .or(from.as_ref().map(|f| segment::Level::Value(f.prominence))),
        min_area: a
            .min_area
            .as_deref()
            .map(segment::parse_area)
            .transpose()?
            .or(from.as_ref().map(|f| segment::Area::Pixels(f.min_area_px))),
        connectivity,
        grow_leaves: a.grow_leaves,
        leaves_only: a.leaves_only,
        noise: a.read.noise_choice(&m)?,
        output: a.output.clone(),
        force: a.force,
        command_line: std::env::args_os()
            .map(|a| a.to_string_lossy().into_owned())
            .collect(),
        physics,
        other_inputs: [
            ("temperature_map", a.physics.temperature_map.as_ref()),
            ("sigma_nt_map", a.motion.sigma_nt_map.as_ref()),
        ]
        .into_iter()
        .filter_map(|(n, p)| Some((n.to_string(), p?.clone())))
        .collect(),
        // The figure options are checked even with --no-figure, so that a mistake in them is
        // not silently ignored.
        threshold_texts: [
            a.floor
                .clone()
                .or_else(|| from.as_ref().map(|f| from_text(f, f.floor, &map_unit))),
            a.prominence
                .clone()
                .or_else(|| from.as_ref().map(|f| from_text(f, f.prominence, &map_unit))),
            a.min_area
                .clone()
                .or_else(|| from.as_ref().map(|f| from_text(f, f.min_area_px, "px"))),
        ],
        figure: {
            let style = a.style.style(&m, !a.no_figure, true)?;
            (!a.no_figure).then_some(style)
        },
        label_choice: cairn::draw::LabelChoice::parse(&a.style.labels)?,
    };
    // Known before the work: leaves labelled by mass or by state need masses (and states a
    // gas temperature too).
    let (by_mass, by_state) = (
        so.label_choice.needs_masses(),
        so.label_choice.needs_states(),
    );
    if so.figure.is_some()
        && (by_mass || by_state)
        && let Some(why) = cairn::draw::no_masses_before_run(
            &m,
            so.physics
                .distance_m
                .map(|d| d / cairn::physics::constants::PC),
            so.physics.temperature_k.is_some(),
            by_state,
        )
    {
        return Err(Error::usage(format!(
            "--labels {} labels the leaves by {}, but this run would have no {} ({why}); give the run what they need, or label the leaves another way, such as --labels 30.",
            a.style.labels,
            if by_mass { "mass" } else { "state" },
            if by_mass { "masses" } else { "states" },
        )));
    }
    let bar = progress_bar(quiet, m.nx() * m.ny());
    let summary = segment::run(&m, &so, &|stage, f| {
        if let Some(b) = &bar {
            b.set_message(stage.to_string());
            b.set_position((f * 1000.0) as u64);
        }
    })?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let t = &summary.thresholds;
    // The unit as cairn read it (MJy/sr for a BUNIT of 'MJY/SR'), as the catalogues give it.
    let unit = match cairn::segment::map_unit(&m) {
        u if u.is_empty() => String::new(),
        u => format!(" {u}"),
    };
    let count =
        |n: usize, one: &str, many: &str| format!("{n} {}", if n == 1 { one } else { many });
    outln!(
        "{} in {}: {}, {}, {}; {:.2} s",
        count(
            summary.leaves + summary.branches + summary.roots,
            "structure",
            "structures"
        ),
        count(summary.trees, "tree", "trees"),
        {
            // A top-level leaf is a tree of its own, counted among the leaves, not the roots
            // (as in the catalogue's kind column); say how many, so that the trees add up.
            let alone = summary.trees.saturating_sub(summary.roots);
            match alone {
                0 => count(summary.leaves, "leaf", "leaves"),
                a if a == summary.leaves => {
                    let all = if a == 1 { "top-level" } else { "all top-level" };
                    format!("{} ({all})", count(summary.leaves, "leaf", "leaves"))
                }
                a => format!(
                    "{} ({a} of them top-level)",
                    count(summary.leaves, "leaf", "leaves")
                ),
            }
        },
        count(summary.branches, "branch", "branches"),
        count(summary.roots, "root", "roots"),
        summary.seconds
    );
    outln!(
        "floor {:.4e}{unit}, prominence {:.4e}{unit}, min area {} px{}; noise {}",
        t.floor,
        t.prominence,
        t.min_area_px,
        if t.typed[2].contains("no beam") {
            " (the map has no beam, so not the default of one beam; give --beam or --min-area)"
        } else {
            ""
        },
        match t.noise {
            Some(n) => format!("{n:.4e}{unit} ({})", t.noise_source),
            None => "none (not measurable in this map; thresholds in map units only)".into(),
        }
    );
    // A level given as a column density or an extinction on a map of another kind: what it
    // stood for, as the summary's levels are in map units.
    for (what, l) in [("--floor", so.floor), ("--prominence", so.prominence)] {
        if let Some(note) = l.and_then(|l| l.conversion_note()) {
            outln!("{what} read as {note}, converted to the map's unit as the masses are");
        }
    }
    // An extinction map's band changes its masses 8.9 times over, and BUNIT 'mag' does not
    // give it: the band read is said.
    if let Some(units::PixelUnit::Extinction { band }) = m.unit {
        // The band was assumed only when neither the option nor the unit named it.
        let assumed = a.read.extinction_band.is_none() && units::named_band(&m.unit_text).is_none();
        outln!(
            "map read as {} in magnitudes{}",
            m.unit.map(|u| u.kind_name()).unwrap_or_default(),
            match band {
                units::ExtinctionBand::V if assumed => "; give --extinction-band K if it is of A_K",
                _ => "",
            }
        );
    }
    if let Some(states) = summary.leaf_states.as_ref().filter(|s| !s.is_empty()) {
        let words: Vec<String> = states.iter().map(|(k, v)| format!("{v} {k}")).collect();
        outln!("leaves by state: {}", words.join(", "));
        // Masses without a gas temperature: why every state is unknown, and the fix.
        if states.iter().all(|(k, _)| k == "unknown")
            && a.physics.temperature.is_none()
            && a.physics.temperature_map.is_none()
        {
            outln!(
                "no gravitational state: give a gas temperature (--temperature or --temperature-map)"
            );
        }
    }
    for w in &t.warnings {
        errln!("warning: {w}");
    }
    if let Some(w) = &summary.negative_masses {
        errln!("warning: {w}");
    }
    if let Some(note) = &summary.physics_note {
        // Asked for with --distance and not made: a warning, on stderr with --quiet too (the
        // one the run record keeps); otherwise part of the summary.
        match &summary.physics_warning {
            Some(w) => errln!("warning: {w}"),
            None => outln!("no masses: {note}"),
        }
    } else if m.wcs.is_none() && a.physics.distance.is_some() {
        // Asked for and not given: a warning, on stderr with --quiet too.
        errln!(
            "warning: no masses or physics columns: {} has no celestial WCS, so its pixels have no size on the sky; give the map a header with CTYPE1/CTYPE2 and CDELT1/CDELT2 (or CD) keywords.",
            a.map.display()
        );
    } else if a.physics.distance.is_none() {
        outln!("no masses: give --distance (and --temperature for the gravitational state)");
    }
    if let Some((in_frame, left_out)) = summary.figure_labels {
        if let Some(chosen) = summary.figure_labels_chosen {
            chosen_note(&a.style.labels, chosen);
        }
        labels_note(in_frame, left_out);
        stretch_note(summary.figure_y_stretch);
        narrowed_note(summary.figure_narrowed_to, a.style.width());
        label_size_note(summary.figure_label_pt);
        beam_note(summary.figure_beam_px);
        scale_bar_note(summary.figure_scale_bar_left_out);
    }
    if let Some((leaves, left_out)) = summary.figure_tree_ids {
        tree_note(leaves, left_out);
    }
    if summary.leaves == 0 {
        outln!(
            "no structure passes these thresholds: the outputs are written but empty; lower --floor, --prominence or --min-area"
        );
    }
    if !quiet {
        for f in &summary.files {
            errln!("wrote {}", f.display());
        }
    }
    Ok(())
}

/// Says how many of the leaves chosen for an id the tree diagram had no room for.
fn tree_note(leaves: usize, left_out: usize) {
    if left_out > 0 {
        outln!(
            "tree: {left_out} of {leaves} leaves left without their id where the diagram is too crowded for ids of {} pt (the highest peaks named first); a wider --width names more",
            cairn::render::MIN_ID_PT
        );
    }
}

fn run_compare(a: &CompareArgs, quiet: bool) -> Result<()> {
    use cairn::compare;
    if !a.truth.is_empty() {
        // Options of the population comparison have no effect on a scoring: said rather than
        // ignored (those with defaults, when set to another value).
        let unused = [
            (!a.label.is_empty(), "--label"),
            (a.mass_column != "mass_excess", "--mass-column"),
            (a.mass_min.is_some(), "--mass-min"),
            (a.tests_above.is_some(), "--tests-above"),
            (a.alpha_max != 3.0, "--alpha-max"),
            (a.resamples != 500, "--resamples"),
            (a.seed != 1, "--seed"),
            (a.be_temperatures != "10K,20K", "--be-temperatures"),
        ];
        if let Some((_, name)) = unused.iter().find(|(given, _)| *given) {
            return Err(Error::usage(format!(
                "{name} belongs to comparing populations and has no effect with --truth, which scores runs against the cores injected into their maps; leave it out."
            )));
        }
        return run_completeness(a, quiet);
    }
    if a.runs.len() < 2 {
        return Err(Error::usage(
            "compare needs at least two runs; give two or more run folders (or their structures.csv files), or one run with --truth to score it against injected cores.",
        ));
    }
    if !a.label.is_empty() && a.label.len() != a.runs.len() {
        return Err(Error::usage(format!(
            "{} labels were given for {} runs; give one --label per run or none.",
            a.label.len(),
            a.runs.len()
        )));
    }
    if a.mass_column != "mass" && a.mass_column != "mass_excess" {
        return Err(Error::usage(format!(
            "--mass-column '{}' is not understood: give mass or mass_excess.",
            a.mass_column
        )));
    }
    if a.resamples < 2 {
        return Err(Error::usage(format!(
            "--resamples {} is too few for a bootstrap; give at least 2 (500 by default).",
            a.resamples
        )));
    }
    if a.resamples > 100_000 {
        return Err(Error::usage(format!(
            "--resamples {} is more than 100000, which would take many minutes without improving a 68% interval; give at most 100000.",
            a.resamples
        )));
    }
    if !(a.bin_width >= 0.01 && a.bin_width <= 2.0) {
        return Err(Error::usage(format!(
            "--bin-width {} is outside 0.01 to 2 dex; give a bin width in that range.",
            a.bin_width
        )));
    }
    if a.width < 600 || a.width > 20000 {
        return Err(Error::usage(format!(
            "--width {} is outside 600 to 20000 pixels; give a plot width in that range.",
            a.width
        )));
    }
    let mass_min = a
        .mass_min
        .as_deref()
        .map(|t| {
            // As given: 1e6Msun, not 999999.9999999999 of the round trip through kilograms.
            units::parse_quantity(t, &[Dimension::Mass], "--mass-min")
                .map(|q| units::as_given(q.si / units::M_SUN))
        })
        .transpose()
        .map_err(Error::usage)?;
    if let Some(m) = mass_min
        && !(m > 0.0 && m.is_finite())
    {
        return Err(Error::usage(format!(
            "--mass-min {} must be a positive mass, such as 0.5Msun.",
            a.mass_min.as_deref().unwrap_or("")
        )));
    }
    let tests_above = a
        .tests_above
        .as_deref()
        .map(|t| {
            units::parse_quantity(t, &[Dimension::Mass], "--tests-above")
                .map(|q| units::as_given(q.si / units::M_SUN))
        })
        .transpose()
        .map_err(Error::usage)?;
    if let Some(m) = tests_above
        && !(m > 0.0 && m.is_finite())
    {
        return Err(Error::usage(format!(
            "--tests-above {} must be a positive mass, such as 0.5Msun.",
            a.tests_above.as_deref().unwrap_or("")
        )));
    }
    if !(a.alpha_max > 1.0 && a.alpha_max <= compare::ALPHA_MAX_LIMIT) {
        return Err(Error::usage(format!(
            "--alpha-max {} is outside the exponents a mass function can have here (above 1, at most {}); give one such as 4.",
            a.alpha_max,
            compare::ALPHA_MAX_LIMIT
        )));
    }
    let mut pops = Vec::new();
    for (i, r) in a.runs.iter().enumerate() {
        // By default a run is named by its folder, a catalogue file by its name without
        // extension, unless it is a run's own structures.csv (its folder) or catalogue of
        // grown leaves (its folder and "-grown").
        let label = a.label.get(i).cloned().unwrap_or_else(|| {
            let is = |name: &str| r.file_name().is_some_and(|n| n == name);
            let grown = is(cairn::segment::names::GROWN_CSV);
            let name = if r.is_dir() {
                r.file_name()
            } else if grown || is(cairn::segment::names::CSV) {
                r.parent().and_then(|p| p.file_name())
            } else {
                r.file_stem()
            };
            name.map(|n| n.to_string_lossy().into_owned() + if grown { "-grown" } else { "" })
                .unwrap_or_else(|| format!("run{}", i + 1))
        });
        // Labels go into the Markdown report and the CSV tables as they are.
        if let Some(c) = label
            .chars()
            .find(|c| matches!(c, '|' | ',' | '"' | '<' | '>' | '&') || c.is_control())
        {
            return Err(Error::usage(format!(
                "--label '{label}' holds {c:?}, which the report's tables cannot show; give a label without | , \" < > &."
            )));
        }
        if label.trim().is_empty() {
            return Err(Error::usage(
                "--label is empty; give each population a name, such as --label north.",
            ));
        }
        if pops.iter().any(|p: &compare::Population| p.label == label) {
            return Err(Error::usage(format!(
                "two populations are labelled '{label}'; give each run a different --label (or compare different folders)."
            )));
        }
        pops.push(compare::read_population(r, &label, &a.mass_column)?);
    }
    if let Some(cut) = tests_above {
        let heaviest = pops
            .iter()
            .flat_map(|p| p.masses.iter().copied())
            .fold(f64::NEG_INFINITY, f64::max);
        let reach = pops
            .iter()
            .filter(|p| p.masses.iter().any(|&m| m >= cut))
            .count();
        if reach < 2 {
            return Err(Error::usage(format!(
                "--tests-above {} leaves {} with leaves at or above it, so no population can be tested against another; give a lower mass (the heaviest leaf has {:.4} Msun).",
                a.tests_above.as_deref().unwrap_or(""),
                match reach {
                    0 => "no population".to_string(),
                    _ => "only one population".to_string(),
                },
                heaviest
            )));
        }
    }
    let o = compare::Options {
        mass_min,
        alpha_max: a.alpha_max,
        resamples: a.resamples,
        seed: a.seed,
        bin_dex: a.bin_width,
        tests_above,
    };
    if let Some(w) = compare::long_run_warning(&pops, &o) {
        errln!("warning: {w}");
    }
    // A bar when the bootstraps are long: resamples times masses, as pixels for a map.
    let work: usize = pops.iter().map(|p| p.masses.len()).sum::<usize>() * a.resamples;
    let bar = progress_bar(quiet, work);
    let c = compare::compare_with_progress(&pops, &o, &|f| {
        if let Some(b) = &bar {
            b.set_message("bootstrap");
            b.set_position((f * 1000.0) as u64);
        }
    });
    drop(bar);
    let temps = a
        .be_temperatures
        .split(',')
        .map(|t| {
            units::parse_quantity(t, &[Dimension::Temperature], "--be-temperatures").map(|q| q.si)
        })
        .collect::<std::result::Result<Vec<f64>, String>>()
        .map_err(Error::usage)?;
    if let Some(t) = temps.iter().find(|t| !(**t > 0.0 && t.is_finite())) {
        return Err(Error::usage(format!(
            "--be-temperatures holds {t} K; give positive temperatures, such as 10K,20K."
        )));
    }
    let (mf, ms) = compare::plots(&c, &pops, &temps);
    let plot_err =
        |e: cairn::render::RenderError| Error::usage(format!("cannot draw the plots: {e}."));
    let mut files: Vec<(String, Vec<u8>)> = vec![
        (
            "report.md".into(),
            compare::report(&c, &pops, &o).into_bytes(),
        ),
        (
            "populations.csv".into(),
            compare::summary_table(&c).to_csv().into_bytes(),
        ),
        (
            "mass_functions.csv".into(),
            compare::mass_function_table(&c).to_csv().into_bytes(),
        ),
        (
            "tests.csv".into(),
            compare::tests_table(&c).to_csv().into_bytes(),
        ),
        (
            "cumulative.csv".into(),
            compare::cumulative_table(&pops).to_csv().into_bytes(),
        ),
    ];
    for (name, plot) in [("mass_functions", &mf), ("mass_size", &ms)] {
        files.push((
            format!("{name}.png"),
            cairn::render::plot::plot_png(plot, a.width, 300.0).map_err(plot_err)?,
        ));
        files.push((
            format!("{name}.svg"),
            cairn::render::plot::plot_svg(plot, a.width, 300.0)
                .map_err(plot_err)?
                .into_bytes(),
        ));
        files.push((
            format!("{name}.pdf"),
            cairn::render::plot::plot_pdf(plot, a.width, 300.0).map_err(plot_err)?,
        ));
    }
    let names: Vec<String> = files.iter().map(|(n, _)| n.clone()).collect();
    // A catalogue given as a file could sit in the output folder under an output's name.
    let inputs: Vec<&std::path::Path> = a.runs.iter().map(|r| r.as_path()).collect();
    output::refuse_inputs_as_outputs(&a.output, &names, &inputs)?;
    let outputs = output::Outputs::plan(&a.output, &names, a.force)?;
    for (n, bytes) in &files {
        output::write_bytes(&outputs.temp(n), bytes)?;
    }
    let files = outputs.commit()?;
    for s in &c.summaries {
        let tail = match (s.tail.as_ref(), s.alpha_uncertainty()) {
            (Some(t), Some((err, from))) => format!(
                "alpha {} ({}) above {:.3} Msun",
                compare::plus_minus(t.alpha, " +/- ", err),
                from.name(),
                t.xmin
            ),
            _ => "no tail fit".into(),
        };
        outln!("{}: {} leaves, {tail}", s.label, s.n);
        for n in &s.notes {
            outln!("  {n}");
        }
    }
    for w in &c.warnings {
        errln!("warning: {w}");
    }
    if !quiet {
        for f in files {
            errln!("wrote {}", f.display());
        }
    }
    Ok(())
}

fn run_draw(a: &DrawArgs, quiet: bool) -> Result<()> {
    use cairn::segment::names;
    // A folder of another run is refused before the work.
    let dir = a.output.clone().unwrap_or_else(|| a.run.clone());
    cairn::draw::check_output_folder(&a.run, &dir)?;
    // Large maps take a while to read and draw: a bar through the three stages.
    let bar = progress_bar(quiet, cairn::draw::run_pixels(&a.run).unwrap_or(0));
    let stage = |name: &str, done: u64| {
        if let Some(b) = &bar {
            b.set_message(name.to_string());
            b.set_position(done);
        }
    };
    stage("reading", 0);
    let run = cairn::draw::read_run(&a.run, a.map.as_deref())?;
    stage("drawing", 400);
    let style = a.style.style(&run.map, true, false)?;
    let input = cairn::draw::FigureInput {
        map: &run.map,
        labels: run.labels.view(),
        structures: run.structures.clone(),
        distance_pc: run.distance_pc,
        title: None,
        label_choice: cairn::draw::LabelChoice::parse(&a.style.labels)?,
    };
    // The outputs are planned before drawing, so that figures already there (those `segment`
    // drew, without --force) are refused at once rather than after the work. The tree is drawn
    // whenever the run has structures.
    let with_tree = !run.structures.is_empty();
    let every: Vec<String> = names::FIGURES.map(String::from).to_vec();
    let list: Vec<String> = every
        .iter()
        .filter(|n| with_tree || !names::TREE_FIGURES.contains(&n.as_str()))
        .cloned()
        .collect();
    // The map (given or recorded in the run) must not be one of the figures' names.
    output::refuse_inputs_as_outputs(&dir, &every, &[run.map.path.as_path()])?;
    let outputs = output::Outputs::plan(&dir, &list, a.force)?;
    let figs = cairn::draw::figures(&input, &style)?;
    stage("writing", 900);
    if figs.tree_png.is_empty() == with_tree {
        return Err(Error::internal("the tree diagram was not drawn as planned"));
    }
    let o = &figs.overlay;
    output::write_bytes(&outputs.temp(names::OVERLAY_PNG), &o.png)?;
    output::write_bytes(&outputs.temp(names::OVERLAY_SVG), o.svg.as_bytes())?;
    output::write_bytes(&outputs.temp(names::OVERLAY_PDF), &o.pdf)?;
    if with_tree {
        output::write_bytes(&outputs.temp(names::TREE_PNG), &figs.tree_png)?;
        output::write_bytes(&outputs.temp(names::TREE_SVG), figs.tree_svg.as_bytes())?;
        output::write_bytes(&outputs.temp(names::TREE_PDF), &figs.tree_pdf)?;
    }
    let written = outputs.commit()?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    chosen_note(&a.style.labels, figs.labels_chosen);
    labels_note(figs.overlay.leaves_in_frame, figs.overlay.labels_left_out);
    stretch_note(figs.overlay.y_stretch);
    narrowed_note(figs.overlay.narrowed_to, a.style.width());
    label_size_note(figs.overlay.smaller_label_pt);
    beam_note(figs.overlay.beam_px);
    scale_bar_note(figs.overlay.scale_bar_left_out);
    tree_note(figs.tree_leaves, figs.tree_ids_left_out);
    for p in written {
        if !quiet {
            errln!("wrote {}", p.display());
        }
    }
    Ok(())
}

/// Says how many leaves `--labels` chose for a label, unless it chose all of them.
fn chosen_note(which: &str, (chosen, leaves): (usize, usize)) {
    if chosen < leaves {
        outln!("figure: {chosen} of {leaves} leaves chosen for a label by --labels {which}");
    }
}

/// Says how many leaves of a figure got no label, if any: where the map is crowded, a label
/// is left out rather than printed over another.
fn labels_note(in_frame: usize, left_out: usize) {
    if left_out > 0 {
        outln!(
            "figure: {left_out} of {in_frame} leaves left without a label where the map is too crowded for one; draw a smaller --region or a wider --width to label them, or choose fewer with --labels"
        );
    }
}

/// Says when the beam is drawn too small to be seen (a wide map in a figure of bounded size).
fn beam_note(beam_px: Option<f64>) {
    if let Some(px) = beam_px.filter(|&px| px < cairn::render::LEAST_VISIBLE_BEAM_PX) {
        outln!(
            "figure: the beam is drawn {px:.1} pixels across, too small to be seen at this width; draw a smaller --region or a wider --width to show it"
        );
    }
}

/// Says when the scale bar was left out, the map's frame too narrow for it and its text.
fn scale_bar_note(left_out: bool) {
    if left_out {
        outln!(
            "figure: the scale bar is left out, the map's frame too narrow for it and its length; draw a wider --width to show it"
        );
    }
}

/// Says when a very long and narrow map was drawn at unequal scales along x and y.
fn stretch_note(y_stretch: Option<f64>) {
    if let Some(r) = y_stretch {
        outln!(
            "figure: the map is drawn at {r:.3} times the scale along y as along x, to keep the figure a usable size; draw a --region for equal scales"
        );
    }
}

/// Says that the leaf labels are set smaller than usual to fit a crowded map.
fn label_size_note(pt: Option<f64>) {
    if let Some(pt) = pt {
        outln!(
            "figure: leaf ids set at {pt:.1} pt rather than {:.2} pt, so that more of them fit on this crowded map",
            cairn::render::USUAL_LABEL_PT
        );
    }
}

/// Says that the overlay is narrower than `--width` asked for, and why.
fn narrowed_note(narrowed_to: Option<u32>, asked: u32) {
    if let Some(w) = narrowed_to {
        outln!(
            "figure: {w} pixels wide rather than --width {asked}, as the tall map's panel (at most twice the width tall) fills no more"
        );
    }
}

/// A progress bar on stderr for maps over a million pixels, when stderr is a terminal.
fn progress_bar(quiet: bool, npix: usize) -> Option<indicatif::ProgressBar> {
    use std::io::IsTerminal;
    if quiet || npix < 1_000_000 || !std::io::stderr().is_terminal() {
        return None;
    }
    // Cleared when dropped too, so an error leaves no half-drawn bar above its message.
    let b = indicatif::ProgressBar::new(1000).with_finish(indicatif::ProgressFinish::AndClear);
    b.set_style(
        indicatif::ProgressStyle::with_template("{msg:>10} [{bar:40}] {percent:>3}%")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    Some(b)
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(
                e.kind(),
                ErrorKind::DisplayHelp
                    | ErrorKind::DisplayVersion
                    | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
            ) {
                e.exit();
            }
            // One sentence, as for every other refusal: the parser's first line and where
            // the options are listed.
            let text = e.render().to_string();
            // The first line, with the indented lines that complete it (the missing
            // arguments, the possible values), up to the usage.
            let mut lines = text.lines();
            let head = lines.next().unwrap_or("").trim();
            let mut first = head.strip_prefix("error: ").unwrap_or(head).to_string();
            // The standard library's words for a number it could not read say what was wrong
            // with the text, not what was expected.
            for (said, meant) in [
                (
                    "invalid digit found in string",
                    "expected a whole number, such as 0 or 12",
                ),
                (
                    "cannot parse integer from empty string",
                    "expected a whole number, such as 0 or 12",
                ),
                (
                    "number too large to fit in target type",
                    "the number is too large",
                ),
                (
                    "number too small to fit in target type",
                    "the number is too small",
                ),
                ("invalid float literal", "expected a number, such as 2.5"),
                (
                    "cannot parse float from empty string",
                    "expected a number, such as 2.5",
                ),
            ] {
                first = first.replace(said, meant);
            }
            let more: Vec<&str> = lines
                .skip_while(|l| l.trim().is_empty())
                .take_while(|l| l.starts_with("  "))
                .map(|l| l.trim().trim_start_matches("tip: "))
                .collect();
            if !more.is_empty() {
                first = if first.ends_with(':') {
                    format!("{first} {}", more.join(", "))
                } else {
                    format!("{first} ({})", more.join("; "))
                };
            }
            let command = std::env::args_os()
                .skip(1)
                .map(|a| a.to_string_lossy().into_owned())
                .find(|w| ["inspect", "segment", "draw", "compare", "synth"].contains(&w.as_str()))
                .map(|w| format!("cairn {w} --help"))
                .unwrap_or_else(|| "cairn --help".into());
            errln!("cairn: {first}; see {command} for the options.");
            return ExitCode::from(2);
        }
    };
    let _quiet = cli.quiet;
    output::remove_partial_outputs_on_interrupt();
    let result = match &cli.command {
        Command::Inspect(a) => run_inspect(a),
        Command::Synth(a) => run_synth(a, cli.quiet),
        Command::Segment(a) => run_segment(a, cli.quiet),
        Command::Draw(a) => run_draw(a, cli.quiet),
        Command::Compare(a) => run_compare(a, cli.quiet),
    };
    let result = result.and_then(|()| {
        match STDOUT_FAILED
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .take()
        {
            // What the command printed is lost; the files it wrote are whole (their outputs
            // are put in place before the summary is printed).
            Some(e) => Err(Error::usage(match &cli.command {
                Command::Inspect(_) => format!(
                    "the standard output could not be written ({e}); check where it goes (a full disk or a closed file)."
                ),
                _ => format!(
                    "the standard output could not be written ({e}), so the summary is lost, though the output files were written in full; check where the standard output goes (a full disk or a closed file)."
                ),
            })),
            None => Ok(()),
        }
    });
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            errln!("cairn: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
