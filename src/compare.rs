//! `cairn compare`: core populations of several runs side by side, with the statistics of
//! [`crate::populations`] and warnings when the comparison is not fair.
//!
//! Owns reading finished runs (a run folder, or a catalogue CSV with its `run.json` beside
//! it), the choice of the population (the leaves: core candidates), the per-population
//! summary (counts by state, mass function, power-law tail with bootstrap, its goodness of
//! fit and its comparison with a truncated log-normal, log-normal fit, mass-size relation with
//! bootstrap, median density), the pairwise tests (Kolmogorov-Smirnov on masses and sizes,
//! slope differences) and the k-sample Anderson-Darling tests, on every leaf or on the
//! leaves at or above a common lower mass ([`Options::tests_above`], which the mass-size fits
//! share), the fairness checks, and the report (Markdown and CSV tables).
//!
//! Sizes: a population needs [`MIN_LEAVES`] leaves with a positive mass and radius; a tail of
//! fewer than [`MIN_TAIL`] leaves gets no slope; a bootstrap spread is the uncertainty
//! reported only from [`MIN_BOOT_FITTED`] resamples with a fit and a spread beyond rounding,
//! else the analytic one is, and said so ([`Summary::alpha_uncertainty`]).
//!
//! Fairness (common practice): populations extracted at linear resolutions (beam FWHM times
//! distance) that differ by more than a factor 1.5, or with mass sensitivities (the mass of one
//! beam at the map noise) that differ by more than 1.5, or under different assumptions
//! (opacity law, temperature, molecular weights) or thresholds (given in different ways), are
//! flagged with the difference named. `cairn segment --common-resolution` is the remedy for
//! resolution.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::populations::{self, Binning, Bootstrap, KsMethod, XminSearch};
use crate::table::Table;

/// One population read from a run.
#[derive(Debug, Clone)]
pub struct Population {
    /// Its name in the report.
    pub label: String,
    /// Where it came from.
    pub source: PathBuf,
    /// Leaf masses (M_sun), in catalogue order; only positive finite values.
    pub masses: Vec<f64>,
    /// Leaf radii (pc) paired with `masses`.
    pub radii: Vec<f64>,
    /// Mean densities (cm^-3) of the same leaves.
    pub densities: Vec<f64>,
    /// The leaves of `masses` by state (bound, marginal, unbound or unknown; a catalogue
    /// without states counts its leaves as unknown), so that the counts add up to the leaves
    /// compared.
    pub states: std::collections::BTreeMap<String, usize>,
    /// Leaves dropped for a missing or non-positive mass or radius.
    pub dropped: usize,
    /// The catalogue column the masses were read from (`mass_excess` or `mass`).
    pub mass_column: String,
    /// The run record (null if none was found).
    pub run: serde_json::Value,
    /// Whether the catalogue is of leaves measured over their grown footprints (`segment
    /// --grow-leaves`), whose masses are taken down to the floor.
    pub grown: bool,
}

/// The number in column `i` of row `n` (zero-based) of the catalogue `csv` whose column names
/// are `header`: an empty cell is a missing value (NaN); any other text must be a number.
pub(crate) fn catalogue_number(
    csv: &Path,
    header: &[String],
    row: &[String],
    n: usize,
    i: usize,
) -> Result<f64> {
    let v = row.get(i).map(String::as_str).unwrap_or("");
    if v.is_empty() {
        return Ok(f64::NAN);
    }
    v.parse::<f64>().map_err(|_| {
        if v.matches(',').count() == 1 && v.replacen(',', ".", 1).parse::<f64>().is_ok() {
            return Error::input(
                csv,
                format!(
                    "row {} holds '{v}' in the numeric column '{}', a number with a decimal comma: write numbers with a decimal point (and separate the columns by commas, tabs or semicolons).",
                    n + 1,
                    header[i]
                ),
            );
        }
        Error::input(
            csv,
            format!(
                "row {} holds '{v}' in the numeric column '{}': the catalogue is damaged; run cairn segment again.",
                n + 1,
                header[i]
            ),
        )
    })
}

/// The catalogue and run record of a run folder, or of a catalogue file with the record
/// beside it.
pub(crate) fn run_files(path: &Path) -> (PathBuf, PathBuf) {
    if path.is_dir() {
        (
            path.join(crate::segment::names::CSV),
            path.join(crate::segment::names::RUN),
        )
    } else {
        (
            path.to_path_buf(),
            path.with_file_name(crate::segment::names::RUN),
        )
    }
}

fn read_text(path: &Path) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|e| {
        Error::input(
            path,
            format!(
                "cannot be read ({e}); give a run folder or a catalogue written by cairn segment."
            ),
        )
    })?;
    // The run's FITS table and VOTable hold the same catalogue as its CSV, which is the one
    // read here.
    let other = if bytes.starts_with(b"SIMPLE  =") {
        Some("a FITS file")
    } else if bytes.starts_with(b"<?xml") {
        Some("an XML file (a VOTable?)")
    } else {
        None
    };
    if let Some(what) = other {
        // The catalogue beside it when there is one (a run's structures.fits or .vot);
        // otherwise (a map, say) the run folder.
        let csv = path.with_extension("csv");
        let give = if csv.is_file() {
            format!(
                "give the run folder or {}",
                csv.file_name()
                    .map(|n| n.to_string_lossy())
                    .unwrap_or_default()
            )
        } else {
            "give the folder cairn segment wrote (or its structures.csv)".to_string()
        };
        return Err(Error::input(
            path,
            format!("is {what}, but compare reads a run's CSV catalogue: {give}."),
        ));
    }
    // A byte-order mark (as spreadsheet programs write before "CSV UTF-8") is no text.
    let bytes = match bytes.strip_prefix("\u{feff}".as_bytes()) {
        Some(rest) => rest.to_vec(),
        None => bytes,
    };
    String::from_utf8(bytes).map_err(|e| {
        Error::input(
            path,
            format!(
                "cannot be read as text ({e}); give a run folder or a CSV catalogue written by cairn segment."
            ),
        )
    })
}

/// The fewest leaves a population can have: the mass-size fit with its standard errors and
/// the log-normal fit's intervals need three.
pub const MIN_LEAVES: usize = 3;

/// Why a catalogue of `leaves` leaves has only `kept` (fewer than [`MIN_LEAVES`]) with a
/// positive mass and radius, `negative` of the others with a mass of zero or below and
/// `missing` without a mass or radius, and what to do: the rest of one sentence.
fn too_few_leaves(
    leaves: usize,
    kept: usize,
    negative: usize,
    missing: usize,
    mass_column: &str,
) -> String {
    let count = |n: usize| match n {
        0 => "no leaf".to_string(),
        1 => "1 leaf".to_string(),
        n => format!("{n} leaves"),
    };
    let need = format!("a population needs at least {MIN_LEAVES} leaves with a positive mass");
    if leaves < MIN_LEAVES {
        return format!(
            "holds {}, and {need}; compare catalogues of more leaves (a lower --prominence or --min-area in cairn segment finds more).",
            count(leaves)
        );
    }
    let fix = if negative >= missing {
        if mass_column == "mass" {
            "their masses are below zero where the map's values are (a zero level below no emission?); compare mass_excess (the default), which is measured above each leaf's merge level, or give cairn segment a map whose zero is no emission"
        } else {
            "their masses are below zero where the map's values are (a zero level below no emission?); give cairn segment a map whose zero is no emission"
        }
    } else {
        "their masses or radii are missing; run cairn segment with --distance (and --temperature for emission maps)"
    };
    let which = if negative > 0 && missing > 0 {
        format!(
            "{negative} with a {mass_column} of zero or below and {missing} without one or without a radius"
        )
    } else if negative > 0 {
        format!("{negative} with a {mass_column} of zero or below")
    } else {
        format!("{missing} without a {mass_column} or a radius")
    };
    let kept = match kept {
        0 => "none".to_string(),
        k => format!("only {k}"),
    };
    format!(
        "holds {} but {kept} with a positive {mass_column} and radius ({which}), and {need}: {fix}.",
        count(leaves)
    )
}

/// The columns of a truth table written by `cairn synth` that a catalogue does not have (see
/// `crate::synth`'s truth table).
const TRUTH_COLUMNS: [&str; 5] = [
    "mass_msun",
    "lon_deg",
    "lat_deg",
    "profile",
    "peak_column_cm2",
];

/// The refusal of the catalogue `csv` (text `catalogue`, column names `header`) that lacks
/// some of the columns compare needs (`kind`, `mass_column`, `radius_pc`): it names exactly the
/// missing ones and gives the fix that fits what the file is (a truth table of `cairn synth`,
/// a catalogue of a run made without a distance, or a catalogue made by hand, whose header as
/// read it lists).
fn missing_columns(csv: &Path, catalogue: &str, header: &[String], mass_column: &str) -> Error {
    let has = |name: &str| header.iter().any(|h| h == name);
    if TRUTH_COLUMNS.iter().all(|c| has(c)) && !has("kind") {
        return Error::input(
            csv,
            "is a truth table written by cairn synth, not a run's catalogue: give it with --truth (cairn compare RUN --truth FILE) to score the run of its map against it.",
        );
    }
    let missing: Vec<&str> = ["kind", mass_column, "radius_pc"]
        .into_iter()
        .filter(|c| !has(c))
        .collect();
    let named = match missing.as_slice() {
        [one] => format!("the column '{one}'"),
        [a, b] => format!("the columns '{a}' and '{b}'"),
        [a, b, c] => format!("the columns '{a}', '{b}' and '{c}'"),
        _ => "the columns it needs".to_string(),
    };
    // A catalogue that cairn segment wrote names its input in its commented header.
    if header_parameters(catalogue).contains_key("input_sha256") && has("kind") {
        return Error::input(
            csv,
            format!(
                "lacks {named}, as its run was made without a distance: run cairn segment with --distance (and --temperature for emission maps) first."
            ),
        );
    }
    const SHOWN: usize = 12;
    let mut read = header
        .iter()
        .take(SHOWN)
        .map(|h| {
            if h.is_empty() {
                "(empty)".to_string()
            } else {
                h.clone()
            }
        })
        .collect::<Vec<_>>()
        .join(", ");
    if header.len() > SHOWN {
        read += &format!(" and {} more", header.len() - SHOWN);
    }
    let kind_note = if missing.contains(&"kind") {
        " (kind holding leaf for each core; branch and root rows are left out)"
    } else {
        ""
    };
    Error::input(
        csv,
        format!(
            "lacks {named} (its header reads: {read}): a catalogue needs the columns kind, {mass_column} and radius_pc{kind_note}, separated by commas, tabs or semicolons, so add or rename them, or give a run folder that cairn segment wrote with --distance."
        ),
    )
}

/// Reads a population from a run folder or a catalogue file. `mass_column` chooses the mass
/// (`mass_excess` by default).
pub fn read_population(path: &Path, label: &str, mass_column: &str) -> Result<Population> {
    let (csv, run_path) = run_files(path);
    let catalogue = read_text(&csv)?;
    let (header, rows) = crate::table::read_catalogue_csv(&csv, &catalogue)?;
    let col = |name: &str| header.iter().position(|h| h == name);
    let (Some(kind), Some(mass), Some(radius)) = (col("kind"), col(mass_column), col("radius_pc"))
    else {
        // A run of a map in a unit without conversion has no masses, whatever its options.
        let run: Option<serde_json::Value> = std::fs::read_to_string(&run_path)
            .ok()
            .and_then(|t| serde_json::from_str(&t).ok());
        let map_record = run.as_ref().map(|r| &r["map"]);
        if let Some(m) = map_record
            .filter(|m| m["unit_kind"].as_str() == Some(crate::units::PixelUnit::Other.kind_name()))
        {
            let unit = match m["unit"].as_str().unwrap_or("") {
                "" => "no unit".to_string(),
                u => format!("the unit {u}"),
            };
            return Err(Error::input(
                &csv,
                format!(
                    "has no masses: its map is in {unit}, which cairn does not convert to column density; compare runs of maps of dust emission, column density or extinction made with --distance."
                ),
            ));
        }
        return Err(missing_columns(&csv, &catalogue, &header, mass_column));
    };
    let (state, density) = (col("state"), col("density"));
    // Why leaves were left out, for the message when too few are left.
    let (mut leaves, mut negative, mut missing) = (0usize, 0usize, 0usize);
    let mut p = Population {
        label: label.to_string(),
        source: path.to_path_buf(),
        masses: vec![],
        radii: vec![],
        densities: vec![],
        states: Default::default(),
        dropped: 0,
        mass_column: mass_column.to_string(),
        run: serde_json::Value::Null,
        grown: catalogue
            .lines()
            .take_while(|l| l.starts_with('#'))
            .any(|l| l.contains(crate::segment::GROWN_MARK)),
    };
    for (n, r) in rows.iter().enumerate() {
        let k = r.get(kind).map(String::as_str).unwrap_or("");
        if !matches!(k, "leaf" | "branch" | "root") {
            return Err(Error::input(
                &csv,
                format!(
                    "row {} has the kind '{k}' (not leaf, branch or root): the catalogue is damaged; run cairn segment again.",
                    n + 1
                ),
            ));
        }
        let num = |i: usize| catalogue_number(&csv, &header, r, n, i);
        let (m, rad) = (num(mass)?, num(radius)?);
        let dens = match density {
            Some(i) => num(i)?,
            None => f64::NAN,
        };
        if k != "leaf" {
            continue;
        }
        let st = match state.and_then(|i| r.get(i)).map(String::as_str) {
            None | Some("") => "unknown",
            Some(s @ ("bound" | "marginal" | "unbound" | "unknown")) => s,
            Some(other) => {
                return Err(Error::input(
                    &csv,
                    format!(
                        "row {} has the state '{other}' (not bound, marginal, unbound or unknown): the catalogue is damaged; run cairn segment again.",
                        n + 1
                    ),
                ));
            }
        };
        leaves += 1;
        if m.is_finite() && m > 0.0 && rad.is_finite() && rad > 0.0 {
            p.masses.push(m);
            p.radii.push(rad);
            p.densities.push(dens);
            // Only the leaves compared are counted by state.
            *p.states.entry(st.to_string()).or_insert(0) += 1;
        } else {
            p.dropped += 1;
            if m <= 0.0 {
                negative += 1;
            } else if !(m.is_finite() && rad.is_finite() && rad > 0.0) {
                missing += 1;
            }
        }
    }
    if p.masses.len() < MIN_LEAVES {
        return Err(Error::input(
            &csv,
            too_few_leaves(leaves, p.masses.len(), negative, missing, mass_column),
        ));
    }
    if let Ok(text) = std::fs::read_to_string(&run_path) {
        p.run = matching_run(&csv, &catalogue, &run_path, &text)?;
    }
    Ok(p)
}

/// What to do about a run record that does not belong to its catalogue.
const REMAKE: &str = "keep each catalogue beside its own run.json, or re-run cairn segment with --force to remake the run";

/// The run record `text` (read from `run_path`, beside the catalogue `csv` whose text is
/// `catalogue`), once it is known
/// to be a run record of the run that wrote the catalogue: its input's SHA-256 and its
/// thresholds equal the ones in the catalogue's commented header. The comparison's fairness
/// checks read the thresholds and the beam from the record, so a record of another run would
/// judge the wrong thresholds.
pub(crate) fn matching_run(
    csv: &Path,
    catalogue: &str,
    run_path: &Path,
    text: &str,
) -> Result<serde_json::Value> {
    let run: serde_json::Value = serde_json::from_str(text).map_err(|e| {
        Error::input(
            run_path,
            format!(
                "is not a run record written by cairn segment (not valid JSON: {e}); {REMAKE}."
            ),
        )
    })?;
    if !run.is_object() || run.get("parameters").is_none() {
        return Err(Error::input(
            run_path,
            format!(
                "is not a run record written by cairn segment (it has no parameters); {REMAKE}."
            ),
        ));
    }
    let said = header_parameters(catalogue);
    let checks: [(&str, &[&str]); 4] = [
        ("input_sha256", &["input", "sha256"]),
        ("floor", &["parameters", "floor", "value"]),
        ("prominence", &["parameters", "prominence", "value"]),
        ("min_area", &["parameters", "min_area", "value"]),
    ];
    for (name, keys) in checks {
        let (Some(in_csv), Some(in_run)) =
            (said.get(name), keys.iter().try_fold(&run, |v, k| v.get(*k)))
        else {
            continue;
        };
        let same = match in_run {
            serde_json::Value::String(t) => t == in_csv,
            serde_json::Value::Number(n) => {
                n.as_f64().is_some() && in_csv.parse::<f64>().ok() == n.as_f64()
            }
            // A non-finite number is null in JSON: nothing to compare.
            _ => true,
        };
        if !same {
            let recorded = match in_run {
                serde_json::Value::Number(n) => {
                    crate::table::fmt_f64(n.as_f64().unwrap_or(f64::NAN))
                }
                serde_json::Value::String(t) => t.clone(),
                other => other.to_string(),
            };
            return Err(Error::input(
                csv,
                format!(
                    "gives {name} {in_csv} but {} records {recorded}, so the two files come from different runs; {REMAKE}.",
                    run_path.display()
                ),
            ));
        }
    }
    Ok(run)
}

/// The run's parameters in a catalogue's commented header, from lines
/// `# parameter NAME = VALUE  (meaning)`.
pub(crate) fn header_parameters(text: &str) -> std::collections::BTreeMap<String, String> {
    text.lines()
        .take_while(|l| l.starts_with('#') || l.trim().is_empty())
        .filter_map(|l| l.strip_prefix("# parameter "))
        .filter_map(|l| {
            let (name, rest) = l.split_once(" = ")?;
            let value = rest.split_once("  (").map_or(rest, |(v, _)| v);
            Some((name.trim().to_string(), value.trim().to_string()))
        })
        .collect()
}

/// What is measured of one population.
#[derive(Debug, Clone)]
pub struct Summary {
    /// Name.
    pub label: String,
    /// Leaves used.
    pub n: usize,
    /// Leaves without a usable mass.
    pub dropped: usize,
    /// Leaves by state.
    pub states: std::collections::BTreeMap<String, usize>,
    /// Power-law tail fit.
    pub tail: Option<populations::PowerLawFit>,
    /// Its bootstrap.
    pub tail_bootstrap: Option<TailBootstrap>,
    /// Its goodness of fit (Clauset et al. 2009 section 4.1).
    pub tail_gof: Option<populations::PowerLawGof>,
    /// The tail's power law against a log-normal truncated at the same lower mass.
    pub tail_vs_lognormal: Option<populations::TailVsLogNormal>,
    /// Log-normal fit.
    pub lognormal: Option<populations::LogNormalFit>,
    /// Mass-size relation (of the leaves at or above [`Options::tests_above`]).
    pub mass_size: Option<populations::LineFit>,
    /// Paired bootstrap of its slope.
    pub mass_size_bootstrap: Option<populations::SlopeBootstrap>,
    /// Leaves used by the two-sample and k-sample tests and the mass-size fit: those at or
    /// above [`Options::tests_above`], else every leaf.
    pub n_tested: usize,
    /// Median mass.
    pub median_mass: f64,
    /// Median density (cm^-3).
    pub median_density: f64,
    /// Differential mass function.
    pub mass_function: Option<populations::MassFunction>,
    /// Why a fit is missing.
    pub notes: Vec<String>,
}

/// Options of a comparison.
#[derive(Debug, Clone)]
pub struct Options {
    /// A fixed lower mass of the power-law tail (else by minimising the KS distance).
    pub mass_min: Option<f64>,
    /// Upper end of the admissible alpha when the tail's lower mass is searched (the
    /// search's window is (1, alpha_max); [`XminSearch::alpha_range`]). Lower masses whose
    /// closed-form alpha is at or above it are left out of the search; when all are, there is
    /// no tail, where powerlaw 2.0.0 warns and returns the nearest with alpha held at the
    /// window's edge (see [`crate::populations::powerlaw`]).
    pub alpha_max: f64,
    /// Bootstrap resamples.
    pub resamples: usize,
    /// Seed of the bootstrap.
    pub seed: u64,
    /// Width of the mass-function bins in dex.
    pub bin_dex: f64,
    /// A common lower mass (M_sun) for the two-sample and k-sample tests and the mass-size
    /// fits: only leaves at or above it, in every population, so that catalogues of
    /// different completeness are compared above one limit (else every leaf).
    pub tests_above: Option<f64>,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            mass_min: None,
            alpha_max: 3.0,
            resamples: 500,
            seed: 1,
            bin_dex: 0.2,
            tests_above: None,
        }
    }
}

/// Below this many leaves at or above `--tests-above`, the report says the tests and the
/// mass-size fit of that population say little (a handful; common practice).
const FEW_TESTED: usize = 5;

/// The masses and radii of the leaves that the tests and the mass-size fit use: those at or
/// above `cut`, or every leaf.
fn tested(p: &Population, cut: Option<f64>) -> (Vec<f64>, Vec<f64>) {
    p.masses
        .iter()
        .zip(&p.radii)
        .filter(|(m, _)| cut.is_none_or(|c| **m >= c))
        .map(|(&m, &r)| (m, r))
        .unzip()
}

/// The fewest leaves in a tail for its slope to be reported. The maximum-likelihood estimate
/// of alpha - 1 from n masses of a pure power law is n / S with S, the sum of ln(M / mass_min),
/// gamma-distributed; its exact standard deviation is (alpha - 1) n / ((n - 1) sqrt(n - 2)),
/// which is below 40% of alpha - 1 from n = 10 on (39%) and above it for fewer (42% at 9),
/// and its bias, a factor n / (n - 1), is then at most 11%. A tail of a few leaves gives a
/// slope that says nothing, and a bootstrap of it cannot measure its spread (of a population
/// of three leaves, every resample that can be searched holds the same three masses).
pub const MIN_TAIL: usize = 10;

/// The fewest bootstrap resamples with a fit whose spread is reported as an uncertainty: the
/// standard deviation of k values has a relative uncertainty of about 1 / sqrt(2 (k - 1))
/// (for Gaussian values; common practice), 16% at k = 20.
pub const MIN_BOOT_FITTED: usize = 20;

/// A bootstrap spread below this fraction of the value's scale (alpha - 1 for a tail, the
/// slope or 1 for the mass-size relation) is rounding: every resample gave the same fit.
const SPREAD_FLOOR: f64 = 1e-9;

/// The largest `--alpha-max`.
pub const ALPHA_MAX_LIMIT: f64 = populations::ALPHA_CEILING;

/// The share of bootstrap resamples held back by the search's window
/// ([`TailBootstrap::window_limited`]) from which the report says that the bootstrap's spread
/// is a lower bound: one in twenty (common practice for a share worth a note, not a test).
pub const WINDOW_LIMITED_SHARE: f64 = 0.05;

/// The bootstrap of a power-law tail, and whether its spread is the uncertainty reported.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TailBootstrap {
    /// Standard deviation of alpha over the resamples with a tail.
    pub alpha_std: f64,
    /// Standard deviation of the tail's lower mass over them.
    pub xmin_std: f64,
    /// Resamples with a tail.
    pub fitted: usize,
    /// Resamples with a tail that a search up to alpha [`ALPHA_MAX_LIMIT`] would have given
    /// one at or above `--alpha-max` (they took another lower mass inside the window); 0 when
    /// `--mass-min` fixes the lower mass or `--alpha-max` is already the largest.
    pub window_limited: usize,
    /// Whether the spread was measured: at least [`MIN_BOOT_FITTED`] resamples with a tail,
    /// and a spread beyond rounding. Otherwise the analytic (alpha - 1)/sqrt(n_tail) is the
    /// uncertainty reported and used.
    pub usable: bool,
}

/// Where the uncertainty of a tail's alpha comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AlphaErrorSource {
    /// The bootstrap's standard deviation.
    Bootstrap,
    /// The analytic (alpha - 1)/sqrt(n_tail) (Clauset et al. 2009 eq. 3.2).
    Analytic,
}

impl AlphaErrorSource {
    /// Its name in the tables and the summary.
    pub fn name(self) -> &'static str {
        match self {
            AlphaErrorSource::Bootstrap => "bootstrap",
            AlphaErrorSource::Analytic => "analytic",
        }
    }
}

impl Summary {
    /// The uncertainty of the tail's alpha that compare reports and uses for the differences
    /// between populations: the bootstrap's standard deviation where it measured a spread
    /// ([`TailBootstrap::usable`]), else the analytic one; `None` without a tail.
    pub fn alpha_uncertainty(&self) -> Option<(f64, AlphaErrorSource)> {
        let t = self.tail.as_ref()?;
        Some(match self.tail_bootstrap {
            Some(b) if b.usable => (b.alpha_std, AlphaErrorSource::Bootstrap),
            _ => (t.alpha_error, AlphaErrorSource::Analytic),
        })
    }

    /// The uncertainty of the mass-size slope used for the differences, and where it comes
    /// from: the bootstrap's standard deviation where it measured a spread (at least
    /// [`MIN_BOOT_FITTED`] resamples with a slope and a spread beyond rounding), else the
    /// least-squares standard error.
    pub fn mass_size_uncertainty(&self) -> Option<(f64, &'static str)> {
        let fit = self.mass_size.as_ref()?;
        Some(
            self.mass_size_bootstrap
                .as_ref()
                .filter(|b| slope_bootstrap_usable(b, fit))
                .map_or((fit.slope_error, "least squares"), |b| {
                    (b.slope_std, "bootstrap")
                }),
        )
    }
}

/// Whether a mass-size bootstrap measured the slope's spread (see
/// [`Summary::mass_size_uncertainty`]).
fn slope_bootstrap_usable(b: &populations::SlopeBootstrap, fit: &populations::LineFit) -> bool {
    b.slopes.len() >= MIN_BOOT_FITTED && b.slope_std > SPREAD_FLOOR * fit.slope.abs().max(1.0)
}

/// `value pm error` (`pm` such as " ± " or " +/- ") for the summary and the plot: two
/// decimals, or two significant digits of an error below 0.005 (and the value to as many
/// decimals), so that an uncertainty never reads 0.
pub fn plus_minus(value: f64, pm: &str, error: f64) -> String {
    let decimals = if error.is_finite() && error > 0.0 && error < 0.005 {
        (1 - error.log10().floor() as i32).max(2) as usize
    } else {
        2
    };
    format!("{value:.decimals$}{pm}{error:.decimals$}")
}

/// The note when a tail was fitted but holds fewer than [`MIN_TAIL`] leaves.
fn small_tail_note(p: &Population, o: &Options, t: &populations::PowerLawFit) -> String {
    let why = format!(
        "fewer than the {MIN_TAIL} a slope needs (below {MIN_TAIL} the spread of the estimate of alpha - 1 exceeds 40% of it)"
    );
    let leaves = |n: usize| {
        if n == 1 {
            "1 leaf".to_string()
        } else {
            format!("{n} leaves")
        }
    };
    if p.masses.len() < MIN_TAIL {
        return format!(
            "no power-law slope: the population has {}, {why}",
            leaves(p.masses.len())
        );
    }
    match o.mass_min {
        Some(m) => format!(
            "no power-law slope: only {} at or above --mass-min {} Msun, {why}; give a smaller --mass-min",
            leaves(t.n_tail)
                .replace("leaf", "leaf lies")
                .replace("leaves", "leaves lie"),
            crate::units::tidy(m)
        ),
        None => format!(
            "no power-law slope: the lower mass found, {} Msun, leaves {} in the tail, {why}; a --mass-min below it fits a larger tail (one the search judged to depart more from a power law)",
            f(t.xmin),
            leaves(t.n_tail)
        ),
    }
}

/// The note when no tail could be fitted, with the advice that fits the case.
fn no_tail_note(p: &Population, o: &Options, why: populations::NoTail) -> String {
    use populations::NoTail;
    let (lo, hi) = p
        .masses
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &m| (a.min(m), b.max(m)));
    let all_equal = lo == hi;
    let column = &p.mass_column;
    match why {
        NoTail::NothingAboveXmin if all_equal => format!(
            "no power-law tail: all {} masses are equal ({} Msun), none above --mass-min {} Msun, and a power law needs masses that differ; check that the catalogue's {column} column holds the leaves' masses",
            p.masses.len(),
            f(hi),
            crate::units::tidy(o.mass_min.unwrap_or(f64::NAN))
        ),
        NoTail::NothingAboveXmin => format!(
            "no power-law tail: no leaf lies above --mass-min {} Msun (the heaviest has {} Msun); give a smaller --mass-min",
            crate::units::tidy(o.mass_min.unwrap_or(f64::NAN)),
            f(hi)
        ),
        NoTail::TooFewDistinct { distinct: 1, .. } => format!(
            "no power-law tail: all {} masses are equal ({} Msun), so there is no tail to fit; check that the catalogue's {column} column holds the leaves' masses",
            p.masses.len(),
            f(hi)
        ),
        NoTail::TooFewDistinct { distinct, needed } => format!(
            "no power-law tail: the masses take only {distinct} distinct values, fewer than the {needed} a search for the tail's lower mass needs; give --mass-min to fit above a chosen mass"
        ),
        // A larger --alpha-max only where one would admit a candidate's alpha.
        NoTail::NoAdmissibleAlpha { least_alpha }
            if o.alpha_max < ALPHA_MAX_LIMIT && least_alpha < ALPHA_MAX_LIMIT =>
        {
            format!(
                "no power-law tail: no lower mass gives a tail with alpha between 1 and {}; a steeper tail needs a larger --alpha-max (the least alpha found is {}; up to {}), or give --mass-min to fit above a chosen mass",
                crate::units::tidy(o.alpha_max),
                crate::units::tidy(least_alpha),
                crate::units::tidy(ALPHA_MAX_LIMIT)
            )
        }
        NoTail::NoAdmissibleAlpha { least_alpha } if least_alpha >= ALPHA_MAX_LIMIT => format!(
            "no power-law tail: every lower mass gives a tail steeper than any power law cairn fits (the least alpha found is {}, above the largest --alpha-max, {}), as when the masses barely differ; give --mass-min to fit above a chosen mass",
            crate::units::tidy(least_alpha),
            crate::units::tidy(ALPHA_MAX_LIMIT)
        ),
        NoTail::NoAdmissibleAlpha { .. } if o.alpha_max >= ALPHA_MAX_LIMIT => format!(
            "no power-law tail: no lower mass gives a tail with alpha below {}, the largest --alpha-max; give --mass-min to fit above a chosen mass",
            crate::units::tidy(o.alpha_max)
        ),
        NoTail::NoAdmissibleAlpha { .. } => format!(
            "no power-law tail: no lower mass gives a tail with alpha between 1 and {}; give --mass-min to fit above a chosen mass",
            crate::units::tidy(o.alpha_max)
        ),
    }
}

/// The notes on bootstrap resamples without a tail, by reason.
fn bootstrap_failure_notes(failures: &populations::TailFailures, o: &Options) -> Vec<String> {
    let mut notes = vec![];
    let of = |k: usize| format!("{k} of {} bootstrap resamples", o.resamples);
    let left_out = "are left out of the bootstrap spread, which then understates the uncertainty";
    if failures.nothing_above_xmin > 0 {
        notes.push(format!(
            "{} drew no leaf above --mass-min {} Msun and {left_out}",
            of(failures.nothing_above_xmin),
            crate::units::tidy(o.mass_min.unwrap_or(f64::NAN))
        ));
    }
    if failures.too_few_distinct > 0 {
        notes.push(format!(
            "{} drew fewer than 3 distinct masses, too few to search for the tail's lower mass, and {left_out}",
            of(failures.too_few_distinct)
        ));
    }
    if failures.no_admissible_alpha > 0 {
        notes.push(format!(
            "{} found no tail with alpha below {} and {left_out}; {}",
            of(failures.no_admissible_alpha),
            crate::units::tidy(o.alpha_max),
            if o.alpha_max < ALPHA_MAX_LIMIT {
                "--alpha-max widens the search"
            } else {
                "--mass-min fixes the lower mass"
            }
        ));
    }
    notes
}

/// The note when a notable share of the tail's bootstrap resamples were held back by the
/// search's window (at least [`WINDOW_LIMITED_SHARE`]).
fn window_limited_note(limited: usize, alpha_std: f64, o: &Options) -> String {
    format!(
        "{limited} of {} bootstrap resamples ({:.0}%) would have chosen a tail with alpha at or above {}, the top of the search window, had it reached alpha {}, and took another lower mass inside it instead: the window narrows the bootstrap's spread, so the uncertainty of alpha (+/- {}) is a lower bound, and the significances of its differences in tests.csv upper bounds; rerun with a larger --alpha-max (up to {}) to measure it",
        o.resamples,
        100.0 * limited as f64 / o.resamples as f64,
        crate::units::tidy(o.alpha_max),
        crate::units::tidy(ALPHA_MAX_LIMIT),
        f(alpha_std),
        crate::units::tidy(ALPHA_MAX_LIMIT)
    )
}

/// Summarises one population.
pub fn summarise(p: &Population, o: &Options) -> Summary {
    summarise_with(p, o, &|| {})
}

/// Runs one pass of `resamples` resamples that calls `tick` once per resample, and ticks the
/// ones it did not make (a fit that does not exist, a pass stopped early), so that progress
/// reaches its end whatever each population allows.
fn counted<T>(
    resamples: usize,
    tick: &(dyn Fn() + Sync),
    run: impl FnOnce(&(dyn Fn() + Sync)) -> T,
) -> T {
    use std::sync::atomic::{AtomicUsize, Ordering};
    let made = AtomicUsize::new(0);
    let out = run(&|| {
        made.fetch_add(1, Ordering::Relaxed);
        tick();
    });
    for _ in made.into_inner()..resamples {
        tick();
    }
    out
}

/// [`summarise`], calling `tick` once per bootstrap resample (from any thread).
fn summarise_with(p: &Population, o: &Options, tick: &(dyn Fn() + Sync)) -> Summary {
    let mut notes = vec![];
    let search = XminSearch {
        alpha_range: (1.0, o.alpha_max),
        ..XminSearch::default()
    };
    let tail = match populations::try_fit_power_law(&p.masses, o.mass_min, &search) {
        Ok(Ok(t)) if t.n_tail >= MIN_TAIL => Some(t),
        Ok(Ok(t)) => {
            notes.push(small_tail_note(p, o, &t));
            None
        }
        Ok(Err(why)) => {
            notes.push(no_tail_note(p, o, why));
            None
        }
        Err(e) => {
            notes.push(format!("no power-law tail: {}", e.message));
            None
        }
    };
    let boot = Bootstrap {
        resamples: o.resamples,
        seed: o.seed,
    };
    let tail_bootstrap = counted(o.resamples, tick, |tick| {
        let t = tail.as_ref()?;
        let b = populations::bootstrap_power_law_with(&p.masses, o.mass_min, &search, &boot, tick)
            .ok()?;
        notes.extend(bootstrap_failure_notes(&b.failures, o));
        let usable = if b.alphas.len() < MIN_BOOT_FITTED {
            notes.push(format!(
                "{} of {} bootstrap resamples gave a tail, fewer than the {MIN_BOOT_FITTED} a spread needs{}, so the uncertainty of alpha is the analytic (alpha - 1)/sqrt(n_tail)",
                b.alphas.len(),
                o.resamples,
                if o.resamples < MIN_BOOT_FITTED {
                    " (give more --resamples)"
                } else {
                    ""
                }
            ));
            false
        } else if b.alpha_std.is_nan() || b.alpha_std <= SPREAD_FLOOR * (t.alpha - 1.0) {
            notes.push(
                "every bootstrap resample gave the same alpha (the resamples differ only in order), so the bootstrap cannot measure its spread and the uncertainty of alpha is the analytic (alpha - 1)/sqrt(n_tail)"
                    .to_string(),
            );
            false
        } else {
            true
        };
        // The bootstrap repeats the fit as it was made, in the same window; where the window
        // held back a notable share of the resamples (their searches would have gone steeper),
        // their spread is narrowed by the window and the uncertainty is a lower bound. It is
        // not widened here: a wider window in the resamples alone would measure the spread of
        // another estimator than the one that gave alpha, whereas a run with a larger
        // --alpha-max gives an estimate and a spread that belong together.
        if usable && b.window_limited as f64 >= WINDOW_LIMITED_SHARE * o.resamples as f64 {
            notes.push(window_limited_note(b.window_limited, b.alpha_std, o));
        }
        Some(TailBootstrap {
            alpha_std: b.alpha_std,
            xmin_std: b.xmin_std,
            fitted: b.alphas.len(),
            window_limited: b.window_limited,
            usable,
        })
    });
    let tail_gof = counted(o.resamples, tick, |tick| {
        tail.as_ref().and_then(|t| {
            populations::goodness_of_fit(&p.masses, t, o.mass_min, &search, &boot, tick)
                .ok()
                .filter(|g| g.fitted > 0)
        })
    });
    // A searched tail whose alpha lies near the window's upper end may be steeper than the
    // search could say (the window cuts the likelihood's range, not the data).
    if let Some(t) = &tail
        && t.xmin_fitted
        && t.alpha > o.alpha_max - 0.1
    {
        notes.push(format!(
            "the tail's alpha ({:.2}) lies near the upper end of the search window ({}): a steeper tail could not be chosen; {}",
            t.alpha,
            crate::units::tidy(o.alpha_max),
            if o.alpha_max < ALPHA_MAX_LIMIT {
                "give a larger --alpha-max to see"
            } else {
                "this is the largest --alpha-max, so give --mass-min to fit above a chosen mass"
            }
        ));
    }
    // A searched tail that a wider window would have placed elsewhere, steeper: the window,
    // not the data, chose this lower mass.
    if let Some(t) = &tail
        && t.xmin_fitted
        && o.alpha_max < ALPHA_MAX_LIMIT
    {
        let widest = XminSearch {
            alpha_range: (1.0, ALPHA_MAX_LIMIT),
            ..search
        };
        if let Ok(Ok(w)) = populations::try_fit_power_law(&p.masses, None, &widest)
            && w.alpha >= o.alpha_max
        {
            notes.push(format!(
                "the search's window set this tail: searched up to alpha {} (--alpha-max {}), the lower mass would be {} Msun with alpha {:.2} over {} leaves, a closer power law by the KS distance than the one inside the window (alpha below {}); give a larger --alpha-max to see",
                crate::units::tidy(ALPHA_MAX_LIMIT),
                crate::units::tidy(ALPHA_MAX_LIMIT),
                f(w.xmin),
                w.alpha,
                w.n_tail,
                crate::units::tidy(o.alpha_max)
            ));
        }
    }
    let tail_vs_lognormal = match tail.as_ref() {
        Some(t) => match populations::power_law_vs_lognormal(&p.masses, t.xmin) {
            Ok(v) => Some(v),
            Err(e) => {
                notes.push(format!(
                    "no comparison of the tail with a log-normal: {}",
                    e.message
                ));
                None
            }
        },
        None => None,
    };
    let lognormal = populations::fit_lognormal(&p.masses).ok();
    let (tested_masses, tested_radii) = tested(p, o.tests_above);
    if let Some(cut) = o.tests_above
        && tested_masses.len() < FEW_TESTED
    {
        let k = tested_masses.len();
        notes.push(if k == 0 {
            format!(
                "no leaf lies at or above --tests-above {} Msun, so this population has no two-sample tests and no mass-size fit, and no k-sample Anderson-Darling test is made",
                crate::units::tidy(cut)
            )
        } else if k < 3 {
            format!(
                "only {} at or above --tests-above {} Msun: too few for a mass-size fit (three at least), and its two-sample tests say little",
                if k == 1 {
                    "1 leaf lies".to_string()
                } else {
                    format!("{k} leaves lie")
                },
                crate::units::tidy(cut)
            )
        } else {
            format!(
                "only {k} leaves lie at or above --tests-above {} Msun, so its two-sample tests and its mass-size fit say little",
                crate::units::tidy(cut)
            )
        });
    }
    let mass_size = if tested_masses.len() < 3 && o.tests_above.is_some() {
        // Said in the note above.
        None
    } else if tested_masses.is_empty() {
        None
    } else {
        match populations::fit_mass_size(&tested_radii, &tested_masses) {
            Ok(f) => Some(f),
            Err(e) => {
                notes.push(format!(
                    "no mass-size fit: {}",
                    e.message.replace("x values", "radii")
                ));
                None
            }
        }
    };
    let mass_size_bootstrap = counted(o.resamples, tick, |tick| {
        let fit = mass_size.as_ref()?;
        let b = populations::bootstrap_mass_size_with(&tested_radii, &tested_masses, &boot, tick)
            .ok()?;
        if b.n_failed > 0 {
            notes.push(format!(
                "{} of {} bootstrap resamples of the mass-size relation drew one radius only and are left out of its bootstrap spread",
                b.n_failed, o.resamples
            ));
        }
        if !slope_bootstrap_usable(&b, fit) {
            notes.push(if b.slopes.len() < MIN_BOOT_FITTED {
                format!(
                    "{} of {} bootstrap resamples of the mass-size relation gave a slope, fewer than the {MIN_BOOT_FITTED} a spread needs, so the differences of slopes use its least-squares error",
                    b.slopes.len(),
                    o.resamples
                )
            } else {
                "every bootstrap resample of the mass-size relation gave the same slope, so the differences of slopes use its least-squares error".to_string()
            });
        }
        Some(b)
    });
    let dens: Vec<f64> = p
        .densities
        .iter()
        .copied()
        .filter(|d| d.is_finite())
        .collect();
    Summary {
        label: p.label.clone(),
        n: p.masses.len(),
        dropped: p.dropped,
        states: p.states.clone(),
        tail,
        tail_bootstrap,
        tail_gof,
        tail_vs_lognormal,
        lognormal,
        mass_size,
        mass_size_bootstrap,
        n_tested: tested_masses.len(),
        median_mass: populations::median(&p.masses).unwrap_or(f64::NAN),
        median_density: populations::median(&dens).unwrap_or(f64::NAN),
        mass_function: populations::mass_function(&p.masses, &Binning::WidthDex(o.bin_dex)).ok(),
        notes,
    }
}

/// A pairwise comparison.
#[derive(Debug, Clone)]
pub struct Pair {
    /// First population.
    pub a: String,
    /// Second population.
    pub b: String,
    /// KS test of the masses.
    pub ks_mass: Option<populations::KsTwoSample>,
    /// KS test of the radii.
    pub ks_radius: Option<populations::KsTwoSample>,
    /// Difference of the tail exponents alpha (a - b) and its combined uncertainty.
    pub alpha_difference: Option<populations::SlopeDifference>,
    /// Difference of the mass-size slopes.
    pub mass_size_difference: Option<populations::SlopeDifference>,
}

/// Warnings for populations that are not independent samples: the same catalogue file given
/// twice, catalogues that hold the same leaves (masses and radii, in order), or runs of the
/// same map (the same input SHA-256 in their run records). Tests between such populations do
/// not compare two clouds (one catalogue twice gives D = 0 and p = 1).
fn same_leaves(pops: &[Population]) -> Vec<String> {
    let mut w = vec![];
    let file = |p: &Population| std::fs::canonicalize(run_files(&p.source).0).ok();
    let sha = |p: &Population| {
        p.run["input"]["sha256"]
            .as_str()
            .filter(|s| !s.is_empty())
            .map(str::to_string)
    };
    for (i, a) in pops.iter().enumerate() {
        for b in &pops[i + 1..] {
            let same = |why: String| {
                format!(
                    "{} and {} {why}, so they are not independent samples and the tests and differences between them do not compare two clouds (one catalogue twice gives D = 0 and p = 1); give runs of different maps to compare clouds",
                    a.label, b.label
                )
            };
            if file(a).is_some() && file(a) == file(b) {
                w.push(same(format!(
                    "are the same catalogue ({})",
                    run_files(&a.source).0.display()
                )));
            } else if a.masses == b.masses && a.radii == b.radii {
                w.push(same(
                    "hold the same leaves (the same masses and radii)".to_string(),
                ));
            } else if let Some(h) = sha(a).filter(|h| Some(h) == sha(b).as_ref()) {
                // Two extractions of one map (other thresholds, distance or temperature): a
                // fair question about the options, not about two clouds.
                w.push(format!(
                    "{} and {} are runs of the same map (input SHA-256 {}... in both run records): their differences show what the options of the two runs change, not a difference between clouds, and the tests' p-values do not apply, as the two share their pixels",
                    a.label,
                    b.label,
                    h.chars().take(12).collect::<String>()
                ));
            }
        }
    }
    w
}

/// A `--mass-min` well below a population's lightest leaf (by more than a factor 1.5, cairn's
/// margin, so that a round number just under it passes): the tail is then the whole
/// population and its slope is that of a power law from a mass where no leaf lies, which a
/// population turning over at low masses makes shallower than its tail's (the lower mass of
/// the tail is the one the data choose, Clauset, Shalizi & Newman 2009); said per population.
fn mass_min_warnings(pops: &[Population], o: &Options) -> Vec<String> {
    let Some(m) = o.mass_min else {
        return Vec::new();
    };
    pops.iter()
        .filter_map(|p| {
            let lo = p.masses.iter().copied().fold(f64::INFINITY, f64::min);
            (lo.is_finite() && m * 1.5 < lo).then(|| {
                format!(
                    "{}: --mass-min {} Msun lies well below its lightest leaf ({} Msun), so its power law is fitted to every leaf from a mass where none lies; leave --mass-min out to let the data choose the tail, or give one within the masses",
                    p.label,
                    crate::units::tidy(m),
                    f(lo)
                )
            })
        })
        .collect()
}

/// Fairness warnings between the populations, each naming the difference.
pub fn fairness(pops: &[Population]) -> Vec<String> {
    let mut w = same_leaves(pops);
    for p in pops {
        if p.dropped > 0 {
            w.push(format!(
                "{}: {} leaves without a positive finite mass and radius were left out",
                p.label, p.dropped
            ));
        }
    }
    let get = |p: &Population, path: &[&str]| -> Option<serde_json::Value> {
        let mut v = &p.run;
        for k in path {
            v = v.get(*k)?;
        }
        (!v.is_null()).then(|| v.clone())
    };
    // Leaves measured over grown footprints (down to the floor) beside leaves measured over
    // their own: the masses are of different things.
    let grown: Vec<&str> = pops
        .iter()
        .filter(|p| p.grown)
        .map(|p| p.label.as_str())
        .collect();
    if !grown.is_empty() && grown.len() < pops.len() {
        w.push(format!(
            "{} {} leaves measured over their grown footprints (segment --grow-leaves: masses down to the floor) and the others over their own footprints (down to their merge levels), so their masses are not comparable; compare catalogues of one kind",
            grown.join(", "),
            if grown.len() == 1 { "holds" } else { "hold" },
        ));
    }
    // A catalogue without its run record: its assumptions and thresholds are unknown, said
    // once; the checks below weigh the populations that have one.
    let unrecorded: Vec<&str> = pops
        .iter()
        .filter(|p| p.run.is_null())
        .map(|p| p.label.as_str())
        .collect();
    if !unrecorded.is_empty() {
        w.push(format!(
            "{} {} no run.json beside {}, so {} resolution, sensitivity, physical assumptions and thresholds are unknown and are not compared",
            unrecorded.join(", "),
            if unrecorded.len() == 1 { "has" } else { "have" },
            if unrecorded.len() == 1 { "its catalogue" } else { "their catalogues" },
            if unrecorded.len() == 1 { "its" } else { "their" },
        ));
    }
    let pops: Vec<&Population> = pops.iter().filter(|p| !p.run.is_null()).collect();
    if pops.len() < 2 {
        return w;
    }
    for (k, what, unit, ratio_limit) in [
        (
            &["physics", "linear_resolution_pc"][..],
            "linear resolution (beam x distance)",
            "pc",
            1.5,
        ),
        (
            &["physics", "mass_sensitivity_msun"][..],
            "mass sensitivity (one beam at the noise)",
            "Msun",
            1.5,
        ),
    ] {
        let vals: Vec<(String, f64)> = pops
            .iter()
            .filter_map(|p| Some((p.label.clone(), get(p, k)?.as_f64()?)))
            .collect();
        if vals.len() < pops.len() {
            w.push(format!(
                "the {what} is unknown for some populations, so it cannot be compared"
            ));
            continue;
        }
        let (lo, hi) = vals.iter().fold((&vals[0], &vals[0]), |(lo, hi), v| {
            (
                if v.1 < lo.1 { v } else { lo },
                if v.1 > hi.1 { v } else { hi },
            )
        });
        if hi.1 > ratio_limit * lo.1 {
            w.push(format!(
                "the {what} differs by a factor {:.2}: {} has {} {unit}, {} has {} {unit}{}",
                hi.1 / lo.1,
                hi.0,
                sig4(hi.1),
                lo.0,
                sig4(lo.1),
                if what.starts_with("linear") {
                    "; re-run segment with --common-resolution"
                } else {
                    ""
                }
            ));
        }
    }
    for (k, what) in [
        (&["physics", "opacity"][..], "dust opacity law"),
        (&["physics", "temperature"][..], "temperature"),
        (&["physics", "mu_h2"][..], "mean molecular weight"),
        (&["physics", "mu_p"][..], "mean particle weight"),
        (&["physics", "nh2_per_av_cm2"][..], "column density per A_V"),
        (&["physics", "av_per_ak"][..], "A_V / A_K"),
        (&["map", "unit_kind"][..], "kind of map"),
        (&["parameters", "floor", "given"][..], "floor (as given)"),
        (
            &["parameters", "prominence", "given"][..],
            "prominence (as given)",
        ),
        (
            &["parameters", "min_area", "given"][..],
            "minimum area (as given)",
        ),
    ] {
        // Each population's value as compared (its JSON text) and as said (in words).
        let vals: Vec<(String, String, String)> = pops
            .iter()
            .map(|p| {
                let mut v = get(p, k);
                // The default floor and prominence are 3 sigma (the floor above the
                // background), the same as given so.
                if k[0] == "parameters"
                    && k[1] != "min_area"
                    && v.as_ref().and_then(|v| v.as_str()) == Some("default")
                {
                    v = Some("3sigma".into());
                }
                let (mut compared, mut said) = match &v {
                    Some(v) => (v.to_string(), in_words(k, v)),
                    None => ("unknown".to_string(), "unknown".to_string()),
                };
                // Before cairn counted a floor in sigma from the background, such a floor was
                // absolute; those runs recorded no background with it.
                if k[1] == "floor"
                    && compared.ends_with("sigma\"")
                    && get(p, &["noise", "background"]).is_none()
                {
                    let note = " (absolute, before cairn counted it from the background)";
                    compared.push_str(note);
                    said.push_str(note);
                }
                (p.label.clone(), compared, said)
            })
            .collect();
        // Thresholds given in other words but used at the same values to the bit (a run
        // and one made with its --thresholds-from) are the same thresholds.
        let same_values = k[0] == "parameters" && {
            let used: Vec<Option<u64>> = pops
                .iter()
                .map(|p| {
                    get(p, &["parameters", k[1], "value"])
                        .and_then(|v| v.as_f64())
                        .map(f64::to_bits)
                })
                .collect();
            used.iter().all(|u| u.is_some() && *u == used[0])
        };
        if !same_values && vals.iter().any(|v| v.1 != vals[0].1) {
            let list: Vec<String> = vals.iter().map(|(l, _, v)| format!("{l}: {v}")).collect();
            w.push(format!("the {what} differs ({})", list.join("; ")));
        }
    }
    w
}

/// `x` to four significant digits, in scientific notation outside 1e-3 to 1e4, for the
/// fairness warnings.
fn sig4(x: f64) -> String {
    let a = x.abs();
    if !x.is_finite() {
        "unknown".into()
    } else if a == 0.0 {
        "0".into()
    } else if !(1e-3..1e4).contains(&a) {
        format!("{x:.3e}")
    } else {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        format!("{x:.decimals$}")
    }
}

/// [`sig4`] without the trailing zeros, for values a user gave (0.1 rather than 0.1000).
fn sig4_given(x: f64) -> String {
    let s = sig4(x);
    let (mantissa, exponent) = s.split_at(s.find('e').unwrap_or(s.len()));
    if !mantissa.contains('.') {
        return s;
    }
    format!(
        "{}{exponent}",
        mantissa.trim_end_matches('0').trim_end_matches('.')
    )
}

/// A value of the run record at `key` in words with its unit, for the fairness warnings: the
/// opacity law as kappa0 at nu0 and beta, numbers to four significant digits, text without
/// JSON quotes.
fn in_words(key: &[&str], v: &serde_json::Value) -> String {
    use serde_json::Value;
    let num = |x: &Value| x.as_f64().map(sig4_given).unwrap_or_else(|| x.to_string());
    match (key.last().copied(), v) {
        (Some("opacity"), Value::Object(o)) => {
            let part = |name: &str, scale: f64| {
                o.get(name)
                    .and_then(Value::as_f64)
                    .map(|x| sig4_given(x * scale))
                    .unwrap_or_else(|| "unknown".into())
            };
            format!(
                "kappa0 = {} cm2/g at nu0 = {} GHz, beta = {}",
                part("kappa0_cm2_per_g", 1.0),
                part("nu0_hz", 1e-9),
                part("beta", 1.0)
            )
        }
        (Some("nh2_per_av_cm2"), Value::Number(_)) => format!("{} cm-2 per mag", num(v)),
        (_, Value::Number(_)) => num(v),
        (_, Value::String(t)) => t.clone(),
        _ => v.to_string(),
    }
}

/// The whole comparison.
#[derive(Debug, Clone)]
pub struct Comparison {
    /// Per population.
    pub summaries: Vec<Summary>,
    /// Per pair.
    pub pairs: Vec<Pair>,
    /// k-sample Anderson-Darling on masses (all populations), or why it was not made.
    pub ad_mass: std::result::Result<populations::AndersonKSample, String>,
    /// k-sample Anderson-Darling on radii, or why it was not made.
    pub ad_radius: std::result::Result<populations::AndersonKSample, String>,
    /// The catalogue column the masses were read from.
    pub mass_column: String,
    /// Fairness warnings.
    pub warnings: Vec<String>,
    /// The common lower mass of the tests and mass-size fits ([`Options::tests_above`]).
    pub tests_above: Option<f64>,
}

/// A warning, before the work starts, when the bootstraps' searches for the tails' lower masses
/// may take more than [`LONG_RUN_SECONDS`]: each resample of the tail's bootstrap and of its
/// goodness of fit searches again (unless `--mass-min` fixes the lower mass), and a search's
/// cost grows with the square of the leaves where the masses depart from a power law
/// everywhere. The time of one search of each population of at least 2,000 leaves is measured
/// (the others take milliseconds) and multiplied out over the threads. The results do not
/// depend on it.
pub fn long_run_warning(pops: &[Population], o: &Options) -> Option<String> {
    if o.mass_min.is_some() {
        return None;
    }
    let search = XminSearch {
        alpha_range: (1.0, o.alpha_max),
        ..XminSearch::default()
    };
    let searches = 2 * o.resamples;
    let threads = rayon::current_num_threads().max(1) as f64;
    let mut total = 0.0;
    let mut largest = (0.0, "");
    for p in pops.iter().filter(|p| p.masses.len() >= 2000) {
        let start = std::time::Instant::now();
        let _ = populations::try_fit_power_law(&p.masses, None, &search);
        let seconds = start.elapsed().as_secs_f64() * searches as f64 / threads;
        total += seconds;
        if seconds > largest.0 {
            largest = (seconds, p.label.as_str());
        }
    }
    (total > LONG_RUN_SECONDS).then(|| {
        format!(
            "the bootstraps search again for each tail's lower mass {searches} times per population (--resamples {} for the tail and as many for its goodness of fit), which may take about {} minutes here ({} the longest); fewer --resamples, or --mass-min to fix the lower mass, shorten it",
            o.resamples,
            (total / 60.0).ceil(),
            largest.1
        )
    })
}

/// Above this many seconds of estimated searching, [`long_run_warning`] warns.
pub const LONG_RUN_SECONDS: f64 = 120.0;

/// Compares populations.
pub fn compare(pops: &[Population], o: &Options) -> Comparison {
    compare_with_progress(pops, o, &|_| {})
}

/// [`compare`], calling `progress` with the fraction of the bootstrap resamples done (0 to 1)
/// a few hundred times at most, from any thread. The results do not depend on it.
pub fn compare_with_progress(
    pops: &[Population],
    o: &Options,
    progress: &(dyn Fn(f64) + Sync),
) -> Comparison {
    use rayon::prelude::*;
    use std::sync::atomic::{AtomicUsize, Ordering};
    // Three passes of resamples per population: the tail's bootstrap, its goodness of fit
    // and the mass-size relation's bootstrap.
    let total = (3 * pops.len() * o.resamples).max(1);
    let step = (total / 200).max(1);
    let done = AtomicUsize::new(0);
    let tick = || {
        let d = done.fetch_add(1, Ordering::Relaxed) + 1;
        if d.is_multiple_of(step) {
            progress(d as f64 / total as f64);
        }
    };
    let summaries: Vec<Summary> = pops
        .par_iter()
        .map(|p| summarise_with(p, o, &tick))
        .collect();
    // The leaves the tests use (at or above --tests-above).
    let cut: Vec<(Vec<f64>, Vec<f64>)> = pops.iter().map(|p| tested(p, o.tests_above)).collect();
    let mut pairs = vec![];
    for i in 0..pops.len() {
        for j in i + 1..pops.len() {
            let (a, b) = (&pops[i], &pops[j]);
            let (sa, sb) = (&summaries[i], &summaries[j]);
            // Each value's uncertainty as reported: the bootstrap's spread where it measured
            // one (it assumes neither Gaussian errors nor, for the slopes, one width of scatter
            // at every radius), else the analytic or least-squares error. A significance is
            // never computed from an uncertainty that is not positive.
            let difference = |x: Option<(f64, f64)>, y: Option<(f64, f64)>| {
                let ((vx, ex), (vy, ey)) = (x?, y?);
                (ex > 0.0 && ey > 0.0)
                    .then(|| populations::slope_difference((vx, ex), (vy, ey)).ok())
                    .flatten()
            };
            let alpha = |s: &Summary| Some((s.tail.as_ref()?.alpha, s.alpha_uncertainty()?.0));
            let slope =
                |s: &Summary| Some((s.mass_size.as_ref()?.slope, s.mass_size_uncertainty()?.0));
            let alpha_difference = difference(alpha(sa), alpha(sb));
            let mass_size_difference = difference(slope(sa), slope(sb));
            pairs.push(Pair {
                a: a.label.clone(),
                b: b.label.clone(),
                ks_mass: populations::ks_2samp(&cut[i].0, &cut[j].0, KsMethod::Auto).ok(),
                ks_radius: populations::ks_2samp(&cut[i].1, &cut[j].1, KsMethod::Auto).ok(),
                alpha_difference,
                mass_size_difference,
            });
        }
    }
    let ms: Vec<&[f64]> = cut.iter().map(|c| c.0.as_slice()).collect();
    let rs: Vec<&[f64]> = cut.iter().map(|c| c.1.as_slice()).collect();
    Comparison {
        summaries,
        pairs,
        ad_mass: k_sample_test(pops, &ms, "masses", o.tests_above),
        ad_radius: k_sample_test(pops, &rs, "radii", o.tests_above),
        warnings: fairness(pops)
            .into_iter()
            .chain(mass_min_warnings(pops, o))
            .collect(),
        tests_above: o.tests_above,
        mass_column: pops
            .first()
            .map_or_else(|| "mass_excess".to_string(), |p| p.mass_column.clone()),
    }
}

/// The k-sample Anderson-Darling test of `samples` (the `what` of each population, those
/// at or above `cut`), or why it was not made, in words for the report.
fn k_sample_test(
    pops: &[Population],
    samples: &[&[f64]],
    what: &str,
    cut: Option<f64>,
) -> std::result::Result<populations::AndersonKSample, String> {
    if samples.len() < 2 {
        return Err("it needs two populations or more".into());
    }
    let empty: Vec<&str> = pops
        .iter()
        .zip(samples)
        .filter(|(_, s)| s.is_empty())
        .map(|(p, _)| p.label.as_str())
        .collect();
    if !empty.is_empty() {
        return Err(format!(
            "{} {} no leaf at or above --tests-above {} Msun",
            empty.join(", "),
            if empty.len() == 1 { "has" } else { "have" },
            crate::units::tidy(cut.unwrap_or(f64::NAN))
        ));
    }
    let first = samples[0][0];
    if samples.iter().all(|s| s.iter().all(|&v| v == first)) {
        return Err(format!(
            "every one of the {what} is the same ({}), so the test is undefined (scipy's anderson_ksamp refuses such samples too)",
            f(first)
        ));
    }
    match populations::anderson_ksamp(samples) {
        Ok(a) if a.statistic.is_finite() => Ok(a),
        Ok(_) => Err(format!(
            "it is undefined for these samples (too few {what} in all, or no spread among them; scipy gives no value either)"
        )),
        Err(e) => Err(e.message),
    }
}

/// The note of the tables and the report when the tests use a common lower mass.
fn tests_above_note(cut: f64) -> String {
    format!(
        "the two-sample Kolmogorov-Smirnov tests, the k-sample Anderson-Darling tests and the mass-size fits use only the leaves of at least {} Msun in every population (--tests-above), so that catalogues of different completeness are compared above one limit; the mass functions, power-law tails, log-normal fits and medians use every leaf",
        crate::units::tidy(cut)
    )
}

fn f(x: f64) -> String {
    if !x.is_finite() {
        return "-".into();
    }
    let a = x.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{x:.3e}")
    } else {
        format!("{x:.3}")
    }
}

/// The caution each table of masses carries.
const MASS_CAUTION: &str = "caution: the masses carry factor-of-two systematics from dust opacity, temperature and distance, shared by runs made with the same assumptions (see the report's Fairness section)";

/// The caution of the tables of tails and tests: compare does not know the catalogues'
/// completeness.
const COMPLETENESS_CAUTION: &str = "caution: the tail fits and the tests assume each catalogue complete above the masses they use (the tail above mass_min); measure a map's completeness limit with cairn synth --into and compare --truth, and give --mass-min or --tests-above at or above it (see the report)";

/// The catalogue column compared, as a parameter of the tables' headers.
fn mass_column_meta(column: &str) -> crate::table::Param {
    crate::table::Param::new(
        "mass_column",
        crate::table::ParamValue::Text(column.into()),
        "",
        mass_column_meaning(column),
    )
}

/// What the masses of a catalogue column are.
fn mass_column_meaning(column: &str) -> &'static str {
    match column {
        "mass" => "each leaf's whole mass over its footprint (--mass-column mass)",
        _ => {
            "each leaf's mass above its merge level (the default; --mass-column mass for the whole footprint)"
        }
    }
}

/// The summary table (one row per population).
pub fn summary_table(c: &Comparison) -> Table {
    let mut t = Table {
        name: "POPULATIONS".into(),
        meta: vec![mass_column_meta(&c.mass_column)],
        notes: vec![MASS_CAUTION.into(), COMPLETENESS_CAUTION.into()],
        ..Default::default()
    };
    if let Some(cut) = c.tests_above {
        t.notes.push(tests_above_note(cut));
    }
    let s = &c.summaries;
    let g = |h: &dyn Fn(&Summary) -> f64| s.iter().map(h).collect::<Vec<f64>>();
    t.push_text(
        "population",
        "label",
        s.iter().map(|x| x.label.clone()).collect(),
    );
    t.push_i64(
        "n",
        "",
        "leaves compared: those with a positive mass and radius",
        s.iter().map(|x| x.n as i64).collect(),
    );
    t.push_i64(
        "n_dropped",
        "",
        "leaves left out for a missing, zero or negative mass or radius (not in n or the state counts)",
        s.iter().map(|x| x.dropped as i64).collect(),
    );
    t.push_i64(
        "n_tested",
        "",
        "leaves used by the two-sample and k-sample tests and the mass-size fit (those at or above --tests-above, else every leaf)",
        s.iter().map(|x| x.n_tested as i64).collect(),
    );
    for st in ["bound", "marginal", "unbound", "unknown"] {
        t.push_i64(
            &format!("n_{st}"),
            "",
            &format!(
                "leaves compared in the state {st} (the four state columns add up to n; a catalogue without states counts its leaves as unknown)"
            ),
            s.iter()
                .map(|x| *x.states.get(st).unwrap_or(&0) as i64)
                .collect(),
        );
    }
    t.push_f64(
        "alpha",
        "",
        "power-law exponent of dN/dM above mass_min (maximum likelihood)",
        g(&|x| x.tail.as_ref().map(|t| t.alpha).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "alpha_err",
        "",
        "(alpha - 1)/sqrt(n_tail)",
        g(&|x| x.tail.as_ref().map(|t| t.alpha_error).unwrap_or(f64::NAN)),
    );
    let usable = |x: &Summary| x.tail_bootstrap.filter(|b| b.usable);
    t.push_f64(
        "alpha_err_boot",
        "",
        &format!(
            "bootstrap standard deviation of alpha; empty where the bootstrap could not measure it (fewer than {MIN_BOOT_FITTED} resamples with a tail, or every resample the same fit)"
        ),
        g(&|x| usable(x).map_or(f64::NAN, |b| b.alpha_std)),
    );
    t.push_text(
        "alpha_err_from",
        "the uncertainty of alpha reported and used in tests.csv: bootstrap (alpha_err_boot) where it measured the spread, else analytic (alpha_err)",
        s.iter()
            .map(|x| {
                x.alpha_uncertainty()
                    .map_or(String::new(), |(_, from)| from.name().to_string())
            })
            .collect(),
    );
    t.push_i64(
        "tail_boot_fitted",
        "",
        "bootstrap resamples that gave a tail",
        s.iter()
            .map(|x| x.tail_bootstrap.map_or(0, |b| b.fitted as i64))
            .collect(),
    );
    t.push_i64(
        "tail_boot_window_limited",
        "",
        &format!(
            "bootstrap resamples with a tail that, searched up to alpha {}, would have chosen one with alpha at or above --alpha-max and took another lower mass inside the window; from {}% of the resamples on, alpha_err_boot is a lower bound (the notes say so); 0 where --mass-min fixes the lower mass or --alpha-max is {}",
            crate::units::tidy(ALPHA_MAX_LIMIT),
            crate::units::tidy(100.0 * WINDOW_LIMITED_SHARE),
            crate::units::tidy(ALPHA_MAX_LIMIT)
        ),
        s.iter()
            .map(|x| x.tail_bootstrap.map_or(0, |b| b.window_limited as i64))
            .collect(),
    );
    t.push_f64(
        "tail_gof_p",
        "",
        "goodness of fit of the power-law tail: the fraction of synthetic sets (semi-parametric bootstrap, Clauset et al. 2009 section 4.1) whose KS distance is at least the data's; at most 0.1 rules the power law out",
        g(&|x| x.tail_gof.as_ref().map(|g| g.p_value).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "mass_min",
        "solMass",
        "lower mass of the tail",
        g(&|x| x.tail.as_ref().map(|t| t.xmin).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "mass_min_err_boot",
        "solMass",
        "bootstrap standard deviation of mass_min; empty where alpha_err_boot is",
        g(&|x| usable(x).map_or(f64::NAN, |b| b.xmin_std)),
    );
    t.push_i64(
        "n_tail",
        "",
        "leaves above mass_min",
        s.iter()
            .map(|x| x.tail.as_ref().map(|t| t.n_tail as i64).unwrap_or(0))
            .collect(),
    );
    t.push_f64(
        "ks_distance_tail",
        "",
        "KS distance of the tail to the fitted law",
        g(&|x| x.tail.as_ref().map(|t| t.ks_distance).unwrap_or(f64::NAN)),
    );
    // The tail's power law against a log-normal (Clauset et al. 2009 section 5; Vuong 1989).
    type Versus = fn(&populations::TailVsLogNormal) -> f64;
    let versus_columns: [(&str, &str, Versus); 3] = [
        (
            "tail_llr_lognormal",
            "log-likelihood ratio R = ln L(power law) - ln L(log-normal truncated at mass_min, fitted to the same tail); negative favours the log-normal; never positive, as the power law is a limit of those log-normals (0 when the best one is that limit)",
            |v| v.ratio,
        ),
        (
            "tail_llr_lognormal_norm",
            "R / (sqrt(n_tail) s), s the standard deviation of the per-leaf log-likelihood differences (Vuong 1989); empty when R = 0 at the limit",
            |v| v.normalized_ratio,
        ),
        (
            "tail_llr_lognormal_p",
            "two-sided p-value of Vuong's test: a low p means the sign of R is meaningful, a high p that the tail cannot tell the two apart; empty at the limit",
            |v| v.p_value,
        ),
    ];
    for (name, description, of) in versus_columns {
        t.push_f64(
            name,
            "",
            description,
            g(&|x| x.tail_vs_lognormal.as_ref().map(of).unwrap_or(f64::NAN)),
        );
    }
    // The log-normal fit's columns; NaN for a population without one.
    type Of = fn(&populations::LogNormalFit) -> f64;
    let lognormal_columns: [(&str, &str, &str, Of); 9] = [
        (
            "lognormal_peak",
            "solMass",
            "exp(mu): peak of dN/dlogM of the log-normal fit",
            |l| l.peak_mass(),
        ),
        (
            "lognormal_peak_lo",
            "solMass",
            "lower end of the 68.27% confidence interval of the peak (Student's t on mu, exact for a log-normal sample)",
            |l| l.peak_mass_interval().0,
        ),
        (
            "lognormal_peak_hi",
            "solMass",
            "upper end of that interval",
            |l| l.peak_mass_interval().1,
        ),
        ("lognormal_mu", "", "mean of ln M", |l| l.mu),
        (
            "lognormal_mu_err",
            "",
            "its large-sample uncertainty sigma/sqrt(n) (too small for a few dozen masses or fewer: see the interval)",
            |l| l.mu_error,
        ),
        ("lognormal_sigma", "", "standard deviation of ln M", |l| {
            l.sigma
        }),
        (
            "lognormal_sigma_err",
            "",
            "its large-sample uncertainty sigma/sqrt(2n) (too small for a few dozen masses or fewer: see the interval)",
            |l| l.sigma_error,
        ),
        (
            "lognormal_sigma_lo",
            "",
            "lower end of the 68.27% confidence interval of sigma (chi-square, exact for a log-normal sample)",
            |l| l.sigma_interval.0,
        ),
        (
            "lognormal_sigma_hi",
            "",
            "upper end of that interval",
            |l| l.sigma_interval.1,
        ),
    ];
    for (name, unit, description, of) in lognormal_columns {
        t.push_f64(
            name,
            unit,
            description,
            g(&|x| x.lognormal.as_ref().map(of).unwrap_or(f64::NAN)),
        );
    }
    t.push_f64(
        "mass_size_slope",
        "",
        "b in log10 M = a + b log10 R",
        g(&|x| x.mass_size.as_ref().map(|l| l.slope).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "mass_size_slope_err",
        "",
        "its least-squares standard error (Gaussian scatter of one width)",
        g(&|x| {
            x.mass_size
                .as_ref()
                .map(|l| l.slope_error)
                .unwrap_or(f64::NAN)
        }),
    );
    type Boot = fn(&populations::SlopeBootstrap) -> f64;
    let boot_columns: [(&str, &str, Boot); 3] = [
        (
            "mass_size_slope_err_boot",
            "standard deviation of the slope over bootstrap resamples of the (R, M) pairs",
            |b| b.slope_std,
        ),
        (
            "mass_size_slope_boot_lo",
            "lower end of the central 68.27% percentile interval of the bootstrap slopes",
            |b| b.slope_interval.0,
        ),
        (
            "mass_size_slope_boot_hi",
            "upper end of that interval",
            |b| b.slope_interval.1,
        ),
    ];
    for (name, description, of) in boot_columns {
        t.push_f64(
            name,
            "",
            description,
            g(&|x| x.mass_size_bootstrap.as_ref().map(of).unwrap_or(f64::NAN)),
        );
    }
    t.push_text(
        "mass_size_slope_err_from",
        &format!(
            "the slope's uncertainty used in tests.csv: bootstrap (mass_size_slope_err_boot) where it measured the spread (at least {MIN_BOOT_FITTED} resamples with a slope, and a spread beyond rounding), else least squares (mass_size_slope_err)"
        ),
        s.iter()
            .map(|x| {
                x.mass_size_uncertainty()
                    .map_or(String::new(), |(_, from)| from.to_string())
            })
            .collect(),
    );
    t.push_f64(
        "mass_size_intercept",
        "",
        "a (M in solMass, R in pc)",
        g(&|x| {
            x.mass_size
                .as_ref()
                .map(|l| l.intercept)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "mass_size_scatter",
        "dex",
        "rms scatter of log10 M about the fit",
        g(&|x| {
            x.mass_size
                .as_ref()
                .map(|l| l.rms_scatter)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "median_mass",
        "solMass",
        "median leaf mass",
        g(&|x| x.median_mass),
    );
    t.push_f64(
        "median_density",
        "cm-3",
        "median mean n(H2)",
        g(&|x| x.median_density),
    );
    t
}

/// The mass functions (one row per population and bin).
pub fn mass_function_table(c: &Comparison) -> Table {
    let mut t = Table {
        name: "MASS_FUNCTIONS".into(),
        meta: vec![mass_column_meta(&c.mass_column)],
        notes: vec![MASS_CAUTION.into()],
        ..Default::default()
    };
    let mut lab = vec![];
    let (mut lo, mut hi, mut n, mut dn, mut err, mut l84, mut u84) =
        (vec![], vec![], vec![], vec![], vec![], vec![], vec![]);
    for s in &c.summaries {
        for b in s.mass_function.iter().flat_map(|m| &m.bins) {
            lab.push(s.label.clone());
            lo.push(b.lo);
            hi.push(b.hi);
            n.push(b.count as i64);
            dn.push(b.dn_dlogm);
            err.push(b.error);
            l84.push(b.lower_limit);
            u84.push(b.upper_limit);
        }
    }
    t.push_text("population", "label", lab);
    t.push_f64("mass_lo", "solMass", "lower bin edge", lo);
    t.push_f64("mass_hi", "solMass", "upper bin edge", hi);
    t.push_i64("count", "", "leaves in the bin", n);
    t.push_f64("dn_dlogm", "dex-1", "dN/dlog10 M", dn);
    t.push_f64(
        "dn_dlogm_err",
        "dex-1",
        "Poisson error sqrt(N) / bin width",
        err,
    );
    t.push_f64(
        "dn_dlogm_lo84",
        "dex-1",
        "lower 84% limit (Gehrels 1986)",
        l84,
    );
    t.push_f64(
        "dn_dlogm_hi84",
        "dex-1",
        "upper 84% limit (Gehrels 1986)",
        u84,
    );
    t
}

/// The pairwise tests, with the k-sample Anderson-Darling tests of all populations on every
/// row.
pub fn tests_table(c: &Comparison) -> Table {
    let mut t = Table {
        name: "TESTS".into(),
        meta: vec![mass_column_meta(&c.mass_column)],
        ..Default::default()
    };
    t.notes.push(
        "the ad_ columns are the k-sample Anderson-Darling tests of all populations together (Scholz & Stephens 1987, midrank), the same on every row".into(),
    );
    for (what, ad) in [("masses", &c.ad_mass), ("radii", &c.ad_radius)] {
        if let Err(why) = ad {
            t.notes.push(format!(
                "the k-sample Anderson-Darling test on {what} was not made: {why}"
            ));
        }
    }
    if let Some(cut) = c.tests_above {
        t.notes.push(tests_above_note(cut));
    }
    let p = &c.pairs;
    let g = |h: &dyn Fn(&Pair) -> f64| p.iter().map(h).collect::<Vec<f64>>();
    t.push_text(
        "a",
        "first population",
        p.iter().map(|x| x.a.clone()).collect(),
    );
    t.push_text(
        "b",
        "second population",
        p.iter().map(|x| x.b.clone()).collect(),
    );
    t.push_f64(
        "ks_mass_d",
        "",
        "two-sample KS statistic on masses",
        g(&|x| x.ks_mass.as_ref().map(|k| k.statistic).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "ks_mass_p",
        "",
        "its p-value",
        g(&|x| x.ks_mass.as_ref().map(|k| k.pvalue).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "ks_radius_d",
        "",
        "two-sample KS statistic on radii",
        g(&|x| {
            x.ks_radius
                .as_ref()
                .map(|k| k.statistic)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "ks_radius_p",
        "",
        "its p-value",
        g(&|x| x.ks_radius.as_ref().map(|k| k.pvalue).unwrap_or(f64::NAN)),
    );
    t.push_f64(
        "alpha_diff",
        "",
        "alpha(a) - alpha(b)",
        g(&|x| {
            x.alpha_difference
                .as_ref()
                .map(|d| d.difference)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "alpha_diff_err",
        "",
        "combined uncertainty (bootstrap where available)",
        g(&|x| {
            x.alpha_difference
                .as_ref()
                .map(|d| d.error)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "alpha_diff_sigma",
        "",
        "significance of the difference, |alpha_diff| / alpha_diff_err, in sigma (unsigned)",
        g(&|x| {
            x.alpha_difference
                .as_ref()
                .map(|d| d.significance)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "mass_size_diff",
        "",
        "mass-size slope(a) - slope(b)",
        g(&|x| {
            x.mass_size_difference
                .as_ref()
                .map(|d| d.difference)
                .unwrap_or(f64::NAN)
        }),
    );
    t.push_f64(
        "mass_size_diff_sigma",
        "",
        "significance of the difference, |mass_size_diff| / its combined uncertainty (bootstrap where available), in sigma (unsigned)",
        g(&|x| {
            x.mass_size_difference
                .as_ref()
                .map(|d| d.significance)
                .unwrap_or(f64::NAN)
        }),
    );
    let pairs = c.pairs.len();
    for (key, what, ad) in [
        ("mass", "masses", &c.ad_mass),
        ("radius", "radii", &c.ad_radius),
    ] {
        let a = ad.as_ref().ok();
        t.push_f64(
            &format!("ad_{key}_statistic"),
            "",
            &format!(
                "standardised k-sample Anderson-Darling statistic on the {what} of all populations (scipy's statistic); empty when the test was not made (see the notes)"
            ),
            vec![a.map_or(f64::NAN, |a| a.statistic); pairs],
        );
        t.push_f64(
            &format!("ad_{key}_p"),
            "",
            "its p-value, interpolated in Scholz & Stephens' table and capped to 0.001-0.25",
            vec![a.map_or(f64::NAN, |a| a.pvalue); pairs],
        );
        t.push_text(
            &format!("ad_{key}_p_capped"),
            "true where the p-value was capped (the true value lies beyond the table)",
            vec![a.map_or(String::new(), |a| a.pvalue_capped.to_string()); pairs],
        );
    }
    t
}

/// The significance level at which the tail's comparison with a log-normal is read (Clauset et
/// al. 2009 read p < 0.1 as significant, from memory of their section 5).
const VERSUS_LEVEL: f64 = 0.1;

/// The report's sentence on a tail's power law against a log-normal.
fn versus_sentence(v: &populations::TailVsLogNormal) -> String {
    use populations::Verdict;
    if v.lognormal.at_power_law_limit {
        return format!(
            "the tail's power law is not distinguished from a log-normal: the best log-normal truncated at {} Msun is the power law itself (its sigma grows without bound), R = 0 over {}.",
            f(v.xmin),
            if v.n == 1 {
                "1 leaf".to_string()
            } else {
                format!("{} leaves", v.n)
            }
        );
    }
    let verdict = match v.verdict(VERSUS_LEVEL) {
        Verdict::PowerLawFavoured => "favoured over",
        Verdict::LogNormalFavoured => "disfavoured against",
        Verdict::NotDistinguished => "not distinguished from",
    };
    format!(
        "the tail's power law is {verdict} a log-normal, p = {} (R = {}, normalised {}, {} at or above {} Msun).",
        f(v.p_value),
        f(v.ratio),
        f(v.normalized_ratio),
        if v.n == 1 {
            "1 leaf".to_string()
        } else {
            format!("{} leaves", v.n)
        },
        f(v.xmin)
    )
}

/// The Markdown report.
pub fn report(c: &Comparison, pops: &[Population], o: &Options) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "# Core populations compared\n");
    let _ = writeln!(
        s,
        "Written by cairn {}. Leaves (structures without children) are the cores; their masses are the catalogues' `{}` column: {}. The leaves compared are those with a positive mass and radius; the others are counted as left out, and the states count only the leaves compared.\n",
        env!("CARGO_PKG_VERSION"),
        c.mass_column,
        mass_column_meaning(&c.mass_column)
    );
    let _ = writeln!(
        s,
        "| population | source | leaves | bound | marginal | unbound | unknown | left out | median mass [Msun] | median n(H2) [cm-3] |"
    );
    let _ = writeln!(
        s,
        "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"
    );
    for (x, p) in c.summaries.iter().zip(pops) {
        let st = |k: &str| x.states.get(k).copied().unwrap_or(0);
        let _ = writeln!(
            s,
            "| {} | `{}` | {} | {} | {} | {} | {} | {} | {} | {} |",
            x.label,
            p.source.display(),
            x.n,
            st("bound"),
            st("marginal"),
            st("unbound"),
            st("unknown"),
            x.dropped,
            f(x.median_mass),
            f(x.median_density)
        );
    }
    if let Some(cut) = c.tests_above {
        let _ = writeln!(s, "\nCommon lower mass: {}.", tests_above_note(cut));
    }
    let _ = writeln!(s, "\n## Mass functions\n");
    let _ = writeln!(
        s,
        "Power-law tail dN/dM ~ M^-alpha above mass_min by maximum likelihood (Clauset, Shalizi & Newman 2009), mass_min {}; uncertainty (alpha-1)/sqrt(n) and from {} bootstrap resamples (seed {}). A tail of fewer than {MIN_TAIL} leaves is given no slope (the estimate's spread then exceeds 40% of alpha - 1). The bootstrap's spread is the uncertainty reported and used between populations where it was measured (at least {MIN_BOOT_FITTED} resamples with a tail, and resamples that differ); elsewhere it is the analytic one, as the notes say. The slope of dN/dlogM is 1 - alpha. Log-normal: maximum-likelihood peak exp(mu) and width sigma of ln M, each with its 68.27% confidence interval (Student's t and chi-square, exact for a complete log-normal sample of three or more leaves; a mass or completeness cut truncates the sample and the intervals then say less).\n",
        match o.mass_min {
            Some(m) => format!("fixed at {m} Msun"),
            None => format!(
                "chosen by minimising the KS distance among the lower masses whose tail has alpha between 1 and {} (--alpha-max)",
                crate::units::tidy(o.alpha_max)
            ),
        },
        o.resamples,
        o.seed
    );
    let _ = writeln!(
        s,
        "| population | alpha | +/- (analytic) | +/- (bootstrap) | mass_min [Msun] | n_tail | log-normal peak [Msun] (68% interval) | sigma(ln M) (68% interval) |"
    );
    let _ = writeln!(s, "| --- | --- | --- | --- | --- | --- | --- | --- |");
    for x in &c.summaries {
        let (a, ae, mm, nt) = x
            .tail
            .as_ref()
            .map(|t| (t.alpha, t.alpha_error, t.xmin, t.n_tail))
            .unwrap_or((f64::NAN, f64::NAN, f64::NAN, 0));
        let be = x
            .tail_bootstrap
            .filter(|b| b.usable)
            .map_or(f64::NAN, |b| b.alpha_std);
        let (lp, ls) = x
            .lognormal
            .as_ref()
            .map(|l| {
                // A value and its interval (none below three masses).
                let with = |v: f64, (a, b): (f64, f64)| {
                    if a.is_finite() && b.is_finite() {
                        format!("{} ({}-{})", f(v), f(a), f(b))
                    } else {
                        f(v)
                    }
                };
                (
                    with(l.peak_mass(), l.peak_mass_interval()),
                    with(l.sigma, l.sigma_interval),
                )
            })
            .unwrap_or(("-".into(), "-".into()));
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {} |",
            x.label,
            f(a),
            f(ae),
            f(be),
            f(mm),
            nt,
            lp,
            ls
        );
    }
    // Why a fit is missing, where one is.
    for x in &c.summaries {
        for n in &x.notes {
            let _ = writeln!(s, "\n{}: {n}.", x.label);
        }
    }
    let _ = writeln!(s, "\n{}", completeness_caution(c));
    if c.summaries.iter().any(|x| x.tail_gof.is_some()) {
        let _ = writeln!(
            s,
            "\nIs a power law plausible for the tail at all (Clauset, Shalizi & Newman 2009, section 4.1)? Synthetic sets as large as the data, drawn from the fitted power law above mass_min (with the probability of the tail) and otherwise from the leaves below it, are fitted as the data were; p is the fraction whose KS distance is at least the data's. At p <= 0.1 the power law is ruled out; above, it is plausible, which does not make it the right law. Each p carries a Monte Carlo uncertainty of about sqrt(p (1 - p) / {}) (more --resamples narrow it).\n",
            c.summaries
                .iter()
                .filter_map(|x| x.tail_gof.as_ref())
                .map(|g| g.fitted)
                .min()
                .unwrap_or(0)
        );
        for x in &c.summaries {
            if let Some(g) = &x.tail_gof {
                let _ = writeln!(
                    s,
                    "- {}: the power law is {} for the tail, p = {} ({} synthetic sets{}).",
                    x.label,
                    if g.p_value <= 0.1 {
                        "ruled out"
                    } else {
                        "plausible"
                    },
                    f(g.p_value),
                    g.fitted,
                    if g.n_failed > 0 {
                        format!(", {} more without a tail left out", g.n_failed)
                    } else {
                        String::new()
                    }
                );
            }
        }
    }
    if c.summaries.iter().any(|x| x.tail_vs_lognormal.is_some()) {
        let _ = writeln!(
            s,
            "\nPower law or log-normal for the tail (Clauset, Shalizi & Newman 2009, section 5): the log-likelihood ratio R of the tail's power law and a log-normal truncated at mass_min and fitted to the same leaves, normalised and with the two-sided p-value of Vuong (1989). A p below {} means the sign of R is meaningful; a higher p means the tail cannot tell the two apart, which says nothing against either. The power law is a limit of those log-normals (sigma without bound), so R is never positive: this test can find a tail curved like a log-normal, never prefer the power law.\n",
            crate::units::tidy(VERSUS_LEVEL)
        );
        for x in &c.summaries {
            if let Some(v) = &x.tail_vs_lognormal {
                let _ = writeln!(s, "- {}: {}", x.label, versus_sentence(v));
            }
        }
    }
    // Which leaves the tests and the mass-size fits use.
    let which = match c.tests_above {
        Some(cut) => format!(
            " Only the leaves of at least {} Msun (--tests-above).",
            crate::units::tidy(cut)
        ),
        None => String::new(),
    };
    let which_tests = match c.tests_above {
        Some(cut) => format!(
            " The Kolmogorov-Smirnov and Anderson-Darling tests and the mass-size slopes use only the leaves of at least {} Msun (--tests-above); the tail exponents, each tail.",
            crate::units::tidy(cut)
        ),
        None => String::new(),
    };
    let _ = writeln!(
        s,
        "\n## Mass-size relation\n\nLeast squares log10 M = a + b log10 R (M in Msun, R the catalogue's radius_pc: the footprint's effective radius in pc, with the beam in it), with the rms scatter of log10 M about the fit. The radius is not deconvolved: leaves not much larger than the beam have radii set largely by the beam, which flattens the slope at small radii and makes the slopes of runs at different linear resolutions differ for that reason alone. The slope's uncertainty is the least-squares standard error (which takes the scatter as Gaussian and the same at every radius) and, from {} bootstrap resamples of the (R, M) pairs (seed {}), the standard deviation and the central 68.27% interval of the resampled slopes, which assume neither; the differences between populations use the bootstrap's where at least {MIN_BOOT_FITTED} resamples gave a slope.{which}\n",
        o.resamples, o.seed
    );
    let _ = writeln!(
        s,
        "| population | leaves | b | +/- (least squares) | +/- (bootstrap) | 68% interval (bootstrap) | a | scatter [dex] |"
    );
    let _ = writeln!(s, "| --- | --- | --- | --- | --- | --- | --- | --- |");
    for x in &c.summaries {
        if let Some(l) = &x.mass_size {
            let (bs, bi) = x
                .mass_size_bootstrap
                .as_ref()
                .map(|b| {
                    (
                        f(b.slope_std),
                        format!("{} to {}", f(b.slope_interval.0), f(b.slope_interval.1)),
                    )
                })
                .unwrap_or(("-".into(), "-".into()));
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {} | {} |",
                x.label,
                l.n,
                f(l.slope),
                f(l.slope_error),
                bs,
                bi,
                f(l.intercept),
                f(l.rms_scatter)
            );
        }
    }
    if !c.pairs.is_empty() {
        let _ = writeln!(
            s,
            "\n## Between populations\n\nTwo-sample Kolmogorov-Smirnov tests (p-values as scipy.stats.ks_2samp computes them); differences of the tail exponents and mass-size slopes with their combined uncertainties (each value's bootstrap spread where it was measured, else its analytic or least-squares error; no significance is given from an uncertainty that is not positive).{which_tests}\n"
        );
        let _ = writeln!(
            s,
            "| a | b | KS masses D | p | KS radii D | p | alpha(a) - alpha(b) | significance, \\|diff\\| / uncertainty [sigma] | slope difference | significance, \\|diff\\| / uncertainty [sigma] |"
        );
        let _ = writeln!(
            s,
            "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"
        );
        for p in &c.pairs {
            let k = |x: &Option<populations::KsTwoSample>| {
                x.as_ref()
                    .map(|k| (f(k.statistic), f(k.pvalue)))
                    .unwrap_or(("-".into(), "-".into()))
            };
            let d = |x: &Option<populations::SlopeDifference>| {
                x.as_ref()
                    .map(|d| (f(d.difference), f(d.significance)))
                    .unwrap_or(("-".into(), "-".into()))
            };
            let (km, kr, ad, md) = (
                k(&p.ks_mass),
                k(&p.ks_radius),
                d(&p.alpha_difference),
                d(&p.mass_size_difference),
            );
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
                p.a, p.b, km.0, km.1, kr.0, kr.1, ad.0, ad.1, md.0, md.1
            );
        }
        for (what, ad) in [("masses", &c.ad_mass), ("radii", &c.ad_radius)] {
            let a = match ad {
                Ok(a) => a,
                Err(why) => {
                    let _ = writeln!(
                        s,
                        "\nk-sample Anderson-Darling test on {what}: not made, as {why}."
                    );
                    continue;
                }
            };
            let _ = writeln!(
                s,
                "\nk-sample Anderson-Darling test on {what} (Scholz & Stephens 1987, midrank; full precision in tests.csv): statistic {}, p-value {}{}.",
                f(a.statistic),
                f(a.pvalue),
                if a.pvalue_capped {
                    " (capped to the tabulated range 0.001-0.25)"
                } else {
                    ""
                }
            );
        }
    }
    let _ = writeln!(s, "\n## Fairness\n");
    if c.warnings.is_empty() {
        let _ = writeln!(
            s,
            "No difference in linear resolution, mass sensitivity, assumptions or thresholds was found."
        );
    } else {
        for w in &c.warnings {
            let _ = writeln!(s, "- warning: {w}.");
        }
    }
    let _ = writeln!(
        s,
        "\nMasses carry factor-of-two systematics from dust opacity, temperature and distance; differences between clouds smaller than that need the same assumptions on both sides."
    );
    s
}

/// The report's caution on completeness, in its section on mass functions: compare cannot
/// tell where a catalogue stops being complete, and a tail fitted below that mass fits the
/// fall of the detections, not the cores' mass function.
fn completeness_caution(c: &Comparison) -> String {
    let starts: Vec<String> = c
        .summaries
        .iter()
        .filter_map(|x| {
            x.tail
                .as_ref()
                .map(|t| format!("{} {} Msun", x.label, f(t.xmin)))
        })
        .collect();
    format!(
        "**Completeness.** The tail fits and the tests between populations assume that each catalogue holds every core above the masses they use: the tail above its mass_min{}, the log-normal fits and {} every leaf. compare cannot tell where a map stops being complete, and a tail whose mass_min lies below that limit fits the fall of the detections, not the cores' mass function. Measure each map's limit by injecting cores of known mass and scoring a run of the injected map (`cairn synth --into MAP`, then `cairn compare RUN --truth TRUTH`, whose report gives the 90% completeness limit); then give `--mass-min` at or above the largest of the limits, so that every tail is fitted where its catalogue is complete, and `--tests-above` at it, so that the Kolmogorov-Smirnov and Anderson-Darling tests and the mass-size fits use only the leaves above one common mass (it leaves the tails and the log-normal fits as they are).",
        if starts.is_empty() {
            String::new()
        } else {
            format!(" (here {})", starts.join(", "))
        },
        match c.tests_above {
            Some(cut) => format!(
                "the tests the leaves at or above --tests-above {} Msun",
                crate::units::tidy(cut)
            ),
            None => "the tests".into(),
        }
    )
}

/// The mass axis of the plots, naming the catalogue column compared in the plots' markup:
/// `M_{excess}` for `mass_excess` (the mass above the merge level), `M` for `mass` (the whole
/// footprint's).
fn mass_axis_label(column: &str) -> String {
    match column {
        "mass" => "M [M_{sun}]".into(),
        "mass_excess" => "M_{excess} [M_{sun}]".into(),
        other => format!("{other} [M_{{sun}}]"),
    }
}

/// The two plots of a comparison: mass functions (with fitted tails) and the mass-size
/// diagram (with lines of constant column density and the critical Bonnor-Ebert mass at
/// `temperatures_k`).
pub fn plots(
    c: &Comparison,
    pops: &[Population],
    temperatures_k: &[f64],
) -> (crate::render::plot::Plot, crate::render::plot::Plot) {
    use crate::physics::constants::{G, K_B, M_H, M_SUN, PC};
    use crate::render::plot::{AxisScale, Guide, Plot, Series};
    let axis = mass_axis_label(&c.mass_column);
    let mut mf = Plot {
        x_label: axis.clone(),
        y_label: "dN/dlog_{10}M".into(),
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Log10,
        ..Default::default()
    };
    for (i, s) in c.summaries.iter().enumerate() {
        let Some(m) = &s.mass_function else { continue };
        let bins: Vec<_> = m.bins.iter().filter(|b| b.count > 0).collect();
        let mut series = Series {
            label: s.label.clone(),
            style: i,
            points: bins.iter().map(|b| (b.center, b.dn_dlogm)).collect(),
            y_errors: Some(
                bins.iter()
                    .map(|b| (b.lower_limit, b.upper_limit))
                    .collect(),
            ),
            ..Default::default()
        };
        if let Some(t) = &s.tail {
            // dN/dlog10 M = ln 10 M dN/dM with dN/dM = n_tail (alpha - 1) / M_min (M / M_min)^-alpha.
            let mmax = pops[i].masses.iter().copied().fold(t.xmin, f64::max);
            let line: Vec<(f64, f64)> = (0..=40)
                .map(|k| {
                    let mass = t.xmin * (mmax / t.xmin).powf(k as f64 / 40.0);
                    (
                        mass,
                        std::f64::consts::LN_10
                            * t.n_tail as f64
                            * (t.alpha - 1.0)
                            * (mass / t.xmin).powf(1.0 - t.alpha),
                    )
                })
                .collect();
            series.line = Some(line);
            let (err, _) = s
                .alpha_uncertainty()
                .unwrap_or((t.alpha_error, AlphaErrorSource::Analytic));
            mf.notes.push(format!(
                "{}: alpha = {} above {:.3} M_{{sun}}",
                s.label,
                plus_minus(t.alpha, " ± ", err),
                t.xmin
            ));
        }
        mf.series.push(series);
    }
    let mut ms = Plot {
        x_label: "R_{eff} [pc]".into(),
        y_label: axis,
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Log10,
        ..Default::default()
    };
    let (mut rmin, mut rmax) = (f64::INFINITY, 0.0f64);
    for (i, (s, p)) in c.summaries.iter().zip(pops).enumerate() {
        for &r in &p.radii {
            rmin = rmin.min(r);
            rmax = rmax.max(r);
        }
        // With a common lower mass, the leaves below it are drawn pale: the fit and the tests
        // leave them out.
        let fitted = |m: f64| c.tests_above.is_none_or(|cut| m >= cut);
        let points = |keep: bool| -> Vec<(f64, f64)> {
            p.radii
                .iter()
                .copied()
                .zip(p.masses.iter().copied())
                .filter(|&(_, m)| fitted(m) == keep)
                .collect()
        };
        let (above, below) = (points(true), points(false));
        if !below.is_empty() {
            ms.series.push(Series {
                // A population wholly below the cut keeps its legend entry here.
                label: if above.is_empty() {
                    s.label.clone()
                } else {
                    String::new()
                },
                style: i,
                points: below,
                faded: true,
                ..Default::default()
            });
        }
        let mut series = Series {
            label: s.label.clone(),
            style: i,
            points: above,
            ..Default::default()
        };
        if let Some(l) = &s.mass_size {
            // Over the radii of the leaves fitted.
            let (r0, r1) = tested(p, c.tests_above)
                .1
                .iter()
                .fold((f64::INFINITY, 0.0f64), |(a, b), &r| (a.min(r), b.max(r)));
            series.line = Some(vec![
                (r0, 10f64.powf(l.intercept + l.slope * r0.log10())),
                (r1, 10f64.powf(l.intercept + l.slope * r1.log10())),
            ]);
        }
        ms.series.push(series);
    }
    if rmax > 0.0 {
        let (r0, r1) = (rmin / 1.5, rmax * 1.5);
        let span = |f: &dyn Fn(f64) -> f64| -> Vec<(f64, f64)> {
            (0..=20)
                .map(|k| {
                    let r = r0 * (r1 / r0).powf(k as f64 / 20.0);
                    (r, f(r))
                })
                .collect()
        };
        // The runs' mean molecular weights when they agree (compare warns when they do not),
        // else cairn's defaults.
        let shared = |key: &str, default: f64| {
            let v: Vec<f64> = pops
                .iter()
                .filter_map(|p| p.run["physics"][key].as_f64())
                .collect();
            match v.first() {
                Some(&x) if v.len() == pops.len() && v.iter().all(|&y| y == x) => x,
                _ => default,
            }
        };
        let (mu_h2, mu_p) = (
            shared("mu_h2", crate::physics::MU_H2),
            shared("mu_p", crate::physics::MU_P),
        );
        for n_cm2 in [1e21, 1e22, 1e23] {
            // M = mu_H2 m_H N pi R^2 (common practice).
            let g = move |r: f64| {
                mu_h2 * M_H * n_cm2 * 1e4 * std::f64::consts::PI * (r * PC).powi(2) / M_SUN
            };
            ms.guides.push(Guide {
                label: format!("N = 10^{{{}}} cm^{{-2}}", n_cm2.log10().round()),
                points: span(&g),
            });
        }
        if let Some(cut) = c.tests_above {
            ms.guides.push(Guide {
                label: format!("fits above {} M_{{sun}}", crate::units::tidy(cut)),
                points: vec![(r0, cut), (r1, cut)],
            });
            ms.notes.push(format!(
                "pale points: leaves below {} M_{{sun}}, left out of the fits and tests",
                crate::units::tidy(cut)
            ));
        }
        for &t in temperatures_k {
            let cs2 = K_B * t / (mu_p * M_H);
            let g = move |r: f64| crate::score::be_coefficient() * r * PC * cs2 / G / M_SUN;
            ms.guides.push(Guide {
                label: format!("M_{{BE}}, {t} K"),
                points: span(&g),
            });
        }
    }
    (mf, ms)
}

/// The cumulative mass functions N(>= M) (one row per population and distinct mass).
pub fn cumulative_table(pops: &[Population]) -> Table {
    let mut t = Table {
        name: "CUMULATIVE".into(),
        meta: pops
            .first()
            .map(|p| mass_column_meta(&p.mass_column))
            .into_iter()
            .collect(),
        notes: vec![MASS_CAUTION.into()],
        ..Default::default()
    };
    let (mut lab, mut mass, mut n) = (vec![], vec![], vec![]);
    for p in pops {
        for (m, k) in populations::cumulative_counts(&p.masses).unwrap_or_default() {
            lab.push(p.label.clone());
            mass.push(m);
            n.push(k as i64);
        }
    }
    t.push_text("population", "label", lab);
    t.push_f64("mass", "solMass", "leaf mass", mass);
    t.push_i64("n_above", "", "number of leaves with at least this mass", n);
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A steep tail (masses of a pure power law with alpha = 4, drawn by inverting its
    /// cumulative distribution; CSN eq. D.4) lies outside the default search window (1, 3):
    /// the summary says so instead of reporting a tail from the window's edge; with
    /// `alpha_max` 10 the fit finds the steep tail (within its own error, (alpha - 1)/sqrt(n),
    /// CSN eq. 3.2, three times over).
    #[test]
    fn a_tail_steeper_than_the_search_window_is_said_and_found_with_a_wider_one() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let masses: Vec<f64> = (0..400)
            .map(|_| {
                let u: f64 = rng.random();
                0.5 * (1.0 - u).powf(-1.0 / 3.0)
            })
            .collect();
        let p = Population {
            label: "steep".into(),
            source: PathBuf::from("steep.csv"),
            radii: vec![0.05; masses.len()],
            densities: vec![1e5; masses.len()],
            masses,
            states: Default::default(),
            dropped: 0,
            mass_column: "mass_excess".into(),
            run: serde_json::Value::Null,
            grown: false,
        };
        let o = Options {
            resamples: 20,
            ..Options::default()
        };
        let narrow = summarise(&p, &o);
        let said = narrow.notes.iter().any(|n| {
            n.contains("near the upper end of the search window")
                || n.contains("no power-law tail") && n.contains("a larger --alpha-max")
                || n.contains("found no tail with alpha below 3")
        });
        assert!(said, "{:?}", narrow.notes);
        let wide = summarise(
            &p,
            &Options {
                alpha_max: 10.0,
                ..o
            },
        );
        let t = wide.tail.expect("a tail inside (1, 10)");
        assert!(
            (t.alpha - 4.0).abs() < 3.0 * t.alpha_error,
            "alpha {} +/- {}",
            t.alpha,
            t.alpha_error
        );
    }

    /// A population of `n` masses drawn from a pure power law of exponent `alpha` above 0.5
    /// Msun (inverting its cumulative distribution, CSN eq. D.4), seeded.
    fn power_law_population(label: &str, alpha: f64, n: usize, seed: u64) -> Population {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let masses: Vec<f64> = (0..n)
            .map(|_| {
                let u: f64 = rng.random();
                0.5 * (1.0 - u).powf(-1.0 / (alpha - 1.0))
            })
            .collect();
        Population {
            label: label.into(),
            source: PathBuf::from(format!("{label}.csv")),
            radii: masses.iter().map(|m| 0.05 * m.sqrt()).collect(),
            densities: vec![1e5; masses.len()],
            masses,
            states: Default::default(),
            dropped: 0,
            mass_column: "mass_excess".into(),
            run: serde_json::Value::Null,
            grown: false,
        }
    }

    /// A steep tail (alpha 2.8, under the default window's top of 3) has many bootstrap
    /// resamples whose search the window holds back: the notes say that the bootstrap's
    /// uncertainty is a lower bound and what to do, and it is one: searched up to alpha 10,
    /// the bootstrap's spread is larger. A shallow tail (alpha 2.3 on 200 leaves, whose
    /// resamples' alphas stay well below 3) is not held back and gets no such note. (On a few
    /// dozen leaves even a tail of alpha 2.3 to 2.4 may be: its resamples' alphas spread widely.)
    #[test]
    fn a_bootstrap_held_back_by_the_window_is_said_to_give_a_lower_bound() {
        let o = Options {
            resamples: 200,
            ..Options::default()
        };
        let said = |s: &Summary| {
            s.notes.iter().any(|n| {
                n.contains("the top of the search window")
                    && n.contains("is a lower bound")
                    && n.contains("rerun with a larger --alpha-max")
            })
        };
        let steep = power_law_population("steep", 2.8, 60, 3);
        let narrow = summarise(&steep, &o);
        let t = narrow.tail.expect("a tail inside (1, 3)");
        assert!(t.alpha < 3.0);
        let b = narrow.tail_bootstrap.unwrap();
        assert!(b.usable);
        assert!(
            b.window_limited as f64 >= WINDOW_LIMITED_SHARE * o.resamples as f64,
            "{b:?}"
        );
        assert!(said(&narrow), "{:?}", narrow.notes);
        let wide = summarise(
            &steep,
            &Options {
                alpha_max: ALPHA_MAX_LIMIT,
                ..o.clone()
            },
        );
        let w = wide.tail_bootstrap.unwrap();
        assert_eq!(w.window_limited, 0);
        assert!(w.alpha_std > b.alpha_std, "{w:?} against {b:?}");
        assert!(!said(&wide), "{:?}", wide.notes);

        let shallow = summarise(&power_law_population("shallow", 2.3, 200, 3), &o);
        let b = shallow.tail_bootstrap.unwrap();
        assert!(b.usable);
        assert!(
            (b.window_limited as f64) < WINDOW_LIMITED_SHARE * o.resamples as f64,
            "{b:?}"
        );
        assert!(!said(&shallow), "{:?}", shallow.notes);
    }

    /// The plots' mass axis names the catalogue column compared (M_{excess} for mass_excess,
    /// M for mass), in the plots' markup for indices.
    #[test]
    fn the_mass_axis_names_the_column_compared() {
        let o = Options {
            resamples: 2,
            ..Options::default()
        };
        for (column, label) in [
            ("mass_excess", "M_{excess} [M_{sun}]"),
            ("mass", "M [M_{sun}]"),
        ] {
            let pops: Vec<Population> = [("a", 11), ("b", 12)]
                .iter()
                .map(|&(l, seed)| Population {
                    mass_column: column.into(),
                    ..power_law_population(l, 2.3, 30, seed)
                })
                .collect();
            let c = compare(&pops, &o);
            let (mf, ms) = plots(&c, &pops, &[]);
            assert_eq!(mf.x_label, label);
            assert_eq!(ms.y_label, label);
        }
    }

    /// The smallest tail given a slope is the smallest n at which the exact standard
    /// deviation of the maximum-likelihood estimate of alpha - 1, (alpha - 1) n / ((n - 1)
    /// sqrt(n - 2)) (n / S with S gamma-distributed of shape n), is below 40% of alpha - 1, as
    /// its documentation and the notes say.
    #[test]
    fn the_smallest_tail_is_where_the_spread_falls_below_forty_percent() {
        let spread = |n: usize| n as f64 / ((n - 1) as f64 * ((n - 2) as f64).sqrt());
        assert!(spread(MIN_TAIL) < 0.4 && spread(MIN_TAIL - 1) > 0.4);
        assert!((spread(10) - 0.3928).abs() < 1e-4 && (spread(9) - 0.4252).abs() < 1e-4);
    }

    /// When no lower mass gives an admissible alpha, a larger --alpha-max is advised only while
    /// there is a larger one to give; at the largest, --mass-min is.
    #[test]
    fn no_admissible_alpha_advice_depends_on_the_window() {
        let p = Population {
            label: "p".into(),
            source: PathBuf::from("p.csv"),
            masses: vec![1.0, 2.0, 3.0],
            radii: vec![0.05; 3],
            densities: vec![1e5; 3],
            states: Default::default(),
            dropped: 0,
            mass_column: "mass_excess".into(),
            run: serde_json::Value::Null,
            grown: false,
        };
        let why = populations::NoTail::NoAdmissibleAlpha { least_alpha: 4.5 };
        let narrow = no_tail_note(&p, &Options::default(), why);
        assert!(
            narrow.contains("a larger --alpha-max (the least alpha found is 4.5; up to 10)"),
            "{narrow}"
        );
        // Masses within a factor 1.0023 of each other: every candidate's alpha is in the
        // hundreds, which no --alpha-max admits, so none is advised.
        let close: Vec<f64> = (0..30).map(|i| 1.0 + 0.0023 * i as f64 / 29.0).collect();
        let search = populations::XminSearch {
            alpha_range: (1.0, ALPHA_MAX_LIMIT),
            ..populations::XminSearch::default()
        };
        let got = populations::try_fit_power_law(&close, None, &search).unwrap();
        let Err(why @ populations::NoTail::NoAdmissibleAlpha { least_alpha }) = got else {
            panic!("{got:?}");
        };
        assert!(least_alpha > 100.0, "{least_alpha}");
        // No finite alpha at all: no advice of a wider window, and no claim of the largest.
        let none = populations::NoTail::NoAdmissibleAlpha {
            least_alpha: f64::NAN,
        };
        let said = no_tail_note(&p, &Options::default(), none);
        assert!(
            !said.contains("--alpha-max") && said.contains("between 1 and 3"),
            "{said}"
        );
        let steep = no_tail_note(&p, &Options::default(), why);
        assert!(
            !steep.contains("a larger --alpha-max") && steep.contains("give --mass-min"),
            "{steep}"
        );
        let widest = Options {
            alpha_max: ALPHA_MAX_LIMIT,
            ..Options::default()
        };
        let wide = no_tail_note(&p, &widest, why);
        assert!(
            !wide.contains("a larger --alpha-max") && wide.contains("give --mass-min"),
            "{wide}"
        );
    }

    /// A run record and its catalogue agree on every threshold as written, whatever the
    /// digits: 4.5809540625368836e20 is a value whose shortest form a JSON parser without exact
    /// round trips reads one unit in the last place off (seen on a run of the demo map).
    #[test]
    fn a_run_record_matches_its_catalogue_to_the_last_bit() {
        let (csv, run) = (Path::new("structures.csv"), Path::new("run.json"));
        for v in [
            4.580_954_062_536_883_6e20,
            0.1 + 0.2,
            1.0e-300,
            3.2e21,
            -7.25,
        ] {
            let catalogue = format!(
                "# parameter input_sha256 = abc  (SHA-256 of the input file)\n# parameter prominence = {}  (map units (given as 3sigma))\nid,kind\n",
                crate::table::fmt_f64(v)
            );
            let text = serde_json::to_string(&serde_json::json!({
                "input": { "sha256": "abc" },
                "parameters": { "prominence": { "value": v } },
            }))
            .unwrap();
            assert!(matching_run(csv, &catalogue, run, &text).is_ok(), "{v:e}");
            let other = text.replace("abc", "abd");
            let e = matching_run(csv, &catalogue, run, &other).unwrap_err();
            assert!(e.to_string().contains("different runs"), "{e}");
        }
    }

    /// The numbers of the fairness warnings read back to within half a unit in the fourth
    /// significant digit and carry exactly four significant digits (the trimmed form, for
    /// values a user gave, at most four and the same value), over fifteen decades.
    #[test]
    fn fairness_numbers_have_four_significant_digits() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let digits = |s: &str| {
            let mantissa = s.split('e').next().unwrap();
            let d: String = mantissa.chars().filter(|c| c.is_ascii_digit()).collect();
            d.trim_start_matches('0').len()
        };
        for _ in 0..20_000 {
            let x = 10f64.powf(rng.random_range(-8.0..7.0))
                * if rng.random_bool(0.5) { 1.0 } else { -1.0 };
            let (s, g) = (sig4(x), sig4_given(x));
            let back: f64 = s.parse().unwrap();
            assert!((back - x).abs() <= 5.0001e-4 * x.abs(), "{x} as {s}");
            // Four digits, unless rounding carried into a fifth place (9.9996 to 10.000).
            let n = digits(&s);
            assert!(n == 4 || (n == 5 && s.contains("10")), "{x} as {s}");
            assert_eq!(g.parse::<f64>().unwrap(), back, "{x} as {g}");
            assert!(digits(&g) <= n && !g.ends_with('.'), "{x} as {g}");
        }
        assert_eq!(sig4_given(2.0), "2");
        assert_eq!(sig4_given(1e12 * 1e-9), "1000");
    }

    /// The mass-size plot's lines of constant column density lie at M = mu_H2 m_H N pi R^2
    /// (common practice), with the constants of astropy 8.0.2 (CODATA 2022, IAU 2015) stored
    /// in fixtures/physics/constants.json, and carry the labels of their own N.
    #[test]
    fn column_density_lines_hold_their_own_column() {
        let text = std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/physics/constants.json"),
        )
        .unwrap();
        let k: serde_json::Value = serde_json::from_str(&text).unwrap();
        let si = |name: &str| k["values_si"][name].as_f64().unwrap();
        let pops: Vec<Population> = (0..2)
            .map(|i| Population {
                label: format!("p{i}"),
                source: PathBuf::from(format!("p{i}.csv")),
                masses: (1..30).map(|j| j as f64 * 0.1).collect(),
                radii: (1..30).map(|j| 0.02 + j as f64 * 0.003).collect(),
                densities: vec![1e5; 29],
                states: Default::default(),
                dropped: 0,
                mass_column: "mass_excess".into(),
                run: serde_json::json!({ "physics": { "mu_h2": 2.8, "mu_p": 2.33 } }),
                grown: false,
            })
            .collect();
        let o = Options {
            resamples: 10,
            ..Options::default()
        };
        let c = compare(&pops, &o);
        let (_, ms) = plots(&c, &pops, &[10.0]);
        let mut seen = 0;
        for exponent in [21, 22, 23] {
            let label = format!("N = 10^{{{exponent}}} cm^{{-2}}");
            let g = ms.guides.iter().find(|g| g.label == label).expect(&label);
            let n_m2 = 10f64.powi(exponent) * 1e4;
            for &(r_pc, m_msun) in &g.points {
                let r = r_pc * si("pc");
                let column =
                    m_msun * si("M_sun") / (2.8 * si("m_H") * std::f64::consts::PI * r * r);
                assert!(
                    (column / n_m2 - 1.0).abs() < 1e-9,
                    "{label}: {column} m-2 at {r_pc} pc"
                );
                seen += 1;
            }
        }
        assert!(seen > 30);
    }

    /// The opacity law of a run record is said in words with its units, never as JSON.
    #[test]
    fn an_opacity_law_is_said_in_words() {
        let v = serde_json::json!({ "kappa0_cm2_per_g": 0.012, "nu0_hz": 2.3e11, "beta": 1.75 });
        let s = in_words(&["physics", "opacity"], &v);
        assert_eq!(s, "kappa0 = 0.012 cm2/g at nu0 = 230 GHz, beta = 1.75");
        let t = in_words(&["physics", "temperature"], &serde_json::json!("14 K"));
        assert_eq!(t, "14 K");
    }
}

#[cfg(test)]
mod progress_tests {
    use super::*;

    /// Every resample is counted: the tail's bootstrap, its goodness of fit and the mass-size
    /// bootstrap of each population, so the last fraction reported is 1 when all three run
    /// (masses of a power law with alpha = 2.5 by inversion of its cumulative distribution,
    /// CSN eq. D.4, and radii growing with mass, so every fit exists), and the results are
    /// those of `compare` without progress.
    #[test]
    fn progress_counts_every_resample() {
        use rand::{RngExt, SeedableRng};
        use std::sync::Mutex;
        let pops: Vec<Population> = (0..2)
            .map(|k| {
                let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11 + k);
                let masses: Vec<f64> = (0..300)
                    .map(|_| {
                        let u: f64 = rng.random();
                        0.3 * (1.0 - u).powf(-1.0 / 1.5)
                    })
                    .collect();
                let radii = masses
                    .iter()
                    .map(|m| 0.05 * m.powf(0.5) * (1.0 + 0.3 * rng.random::<f64>()))
                    .collect();
                Population {
                    label: format!("p{k}"),
                    source: PathBuf::from(format!("p{k}.csv")),
                    radii,
                    densities: vec![1e5; masses.len()],
                    masses,
                    states: Default::default(),
                    dropped: 0,
                    mass_column: "mass_excess".into(),
                    run: serde_json::Value::Null,
                    grown: false,
                }
            })
            .collect();
        let o = Options {
            resamples: 50,
            ..Options::default()
        };
        let seen = Mutex::new(Vec::new());
        let c = compare_with_progress(&pops, &o, &|f| seen.lock().unwrap().push(f));
        let seen = seen.into_inner().unwrap();
        let most = seen.iter().copied().fold(0.0, f64::max);
        assert_eq!(most, 1.0, "{} reports", seen.len());
        // Fewer resamples than 200 per report step: one report per resample.
        assert_eq!(seen.len(), 3 * pops.len() * o.resamples);
        for s in &c.summaries {
            assert!(s.tail_bootstrap.is_some() && s.tail_gof.is_some());
            assert!(s.mass_size_bootstrap.is_some());
        }
        let plain = compare(&pops, &o);
        assert_eq!(
            format!("{:?}", c.summaries),
            format!("{:?}", plain.summaries)
        );
        // Populations whose mass-size fit cannot be made (every leaf below --tests-above):
        // the resamples not made are counted all the same, so the bar still ends.
        let o = Options {
            tests_above: Some(1e9),
            ..o
        };
        let seen = Mutex::new(Vec::new());
        let c = compare_with_progress(&pops, &o, &|f| seen.lock().unwrap().push(f));
        let seen = seen.into_inner().unwrap();
        assert!(c.summaries.iter().all(|s| s.mass_size_bootstrap.is_none()));
        assert_eq!(seen.len(), 3 * pops.len() * o.resamples);
        assert_eq!(seen.iter().copied().fold(0.0, f64::max), 1.0);
    }
}
