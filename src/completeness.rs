//! Scoring a finished run against the truth table of injected cores (`cairn compare RUN
//! --truth NAME-truth.csv`): which injected cores were recovered, how their measured masses
//! compare with the truth, and the completeness per bin of true mass.
//!
//! * Matching: each injected core is matched to a leaf of the run's catalogue whose *peak*
//!   lies within one beam FWHM (the geometric mean of the major and minor axes) of the core's
//!   true centre, on the sky. The peak is used rather than the centroid because an injected
//!   core's peak is its true centre up to the noise, whereas a leaf's centroid is pulled by the
//!   background under it and by where its footprint is cut at the merge level. Matching is one
//!   to one: all pairs within the radius are taken in order of increasing separation (ties by
//!   core id, then leaf id) and a pair is kept when neither its core nor its leaf is taken yet.
//!   With injected cores at least two FWHMs apart (the default of `synth --into`) no leaf can
//!   lie within one FWHM of two cores, so this is the unique nearest match.
//! * Separations on the sky by Vincenty's formula for the sphere ([`crate::inject`]).
//! * Completeness per bin of log10 true mass, bins of `bin_dex` anchored at 1 Msun
//!   (edges at k * `bin_dex` dex), with the Wilson (1927, JASA 22, 209) score interval for the
//!   fraction at z = 1 (68.27%, one standard deviation of the normal):
//!   (k + z^2/2)/(n + z^2) +- z sqrt(n) / (n + z^2) sqrt(p (1 - p) + z^2 / (4 n)), p = k/n.
//! * The completeness limit: the lower edge of the lowest bin from which every bin above it
//!   (that holds injected cores) has a recovered fraction of at least 90%; found by walking the
//!   bins down from the most massive and stopping at the first one below 90%.
//! * Beside it, an unbinned limit ([`logistic_fit`]): a maximum-likelihood logistic fit of
//!   recovery (0 or 1 per counted core) against log10 true mass, whose 90% and 50% points do not
//!   depend on the bin width or on sparse top bins.
//! * Recovered masses: both `mass` (the whole footprint) and `mass_excess` (above the merge
//!   level) over the true mass. An injected core sits on the real map's background, which
//!   `mass` counts too; `mass_excess` removes the level where the leaf meets its surroundings,
//!   so it is the fairer comparison (it also cuts the core's own wings below that level).
//! * Pooling ([`pool`]): several injections (`compare RUN1 RUN2 --truth T1 --truth T2`) are
//!   each checked and matched within their own pair of run and truth table, since the injected
//!   maps differ; the bins, the limit and the medians are then those of all the pairs' counted
//!   cores together, so a bin's counts are the sums of the pairs' counts. One baseline serves
//!   every pair (each checked against it). Runs made with other thresholds, distance or
//!   temperature are named ([`run_differences`]), as pooling them mixes two extractions.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::inject::separation_arcsec;
use crate::table::Table;

/// One injected core as read from a truth table.
#[derive(Debug, Clone, PartialEq)]
pub struct TrueCore {
    /// Identifier in the truth table.
    pub id: i64,
    /// Zero-based pixel column.
    pub x: f64,
    /// Zero-based pixel row.
    pub y: f64,
    /// Longitude \[deg\] in the map's frame.
    pub lon: f64,
    /// Latitude \[deg\].
    pub lat: f64,
    /// True mass \[M_sun\].
    pub mass: f64,
}

/// A truth table and the map it belongs to.
#[derive(Debug, Clone)]
pub struct Truth {
    /// The file.
    pub path: PathBuf,
    /// The cores.
    pub cores: Vec<TrueCore>,
    /// SHA-256 of the map the cores were injected into (the written map), if recorded.
    pub map_sha256: Option<String>,
    /// Name of that map.
    pub map_name: Option<String>,
    /// The injection's record (`NAME-spec.json` beside `NAME-truth.csv`), if it was found, or
    /// why it could not be read.
    pub spec: std::result::Result<serde_json::Value, String>,
}

/// The line of a truth table that names its map: `# map NAME sha256 HEX`.
pub fn map_note(name: &str, sha256: &str) -> String {
    format!("map {name} sha256 {sha256}")
}

/// Reads a truth table written by `cairn synth`.
pub fn read_truth(path: &Path) -> Result<Truth> {
    if let Some(e) = crate::error::not_text(
        path,
        "a truth table (a CSV text file)",
        "give --truth the NAME-truth.csv that cairn synth wrote",
    ) {
        return Err(e);
    }
    let text = std::fs::read_to_string(path).map_err(|e| {
        Error::input(
            path,
            format!("cannot be read ({e}); give the NAME-truth.csv that cairn synth wrote."),
        )
    })?;
    if text.trim_start().starts_with('{') {
        // A JSON file, most likely the specification written beside the truth table.
        let beside = path
            .file_name()
            .and_then(|n| n.to_str())
            .and_then(|n| n.strip_suffix("-spec.json"))
            .map(|stem| format!(" ({stem}-truth.csv beside it)"))
            .unwrap_or_default();
        return Err(Error::input(
            path,
            format!(
                "is a JSON file (a NAME-spec.json, say), not a truth table; give the NAME-truth.csv that cairn synth wrote{beside}."
            ),
        ));
    }
    let mut map_sha256 = None;
    let mut map_name = None;
    for l in text.lines().take_while(|l| l.starts_with('#')) {
        if let Some(rest) = l.strip_prefix("# map ")
            && let Some((name, sha)) = rest.rsplit_once(" sha256 ")
        {
            map_name = Some(name.to_string());
            map_sha256 = Some(sha.trim().to_string());
        }
    }
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.starts_with('#') && !l.trim().is_empty());
    let bad = |m: String| Error::input(path, m);
    let Some((_, head)) = lines.next() else {
        return Err(bad(
            "holds no table; give the NAME-truth.csv that cairn synth wrote.".into(),
        ));
    };
    let cols: Vec<&str> = head.split(',').collect();
    let col = |n: &str| cols.iter().position(|c| *c == n);
    let (Some(ci), Some(cx), Some(cy), Some(clon), Some(clat), Some(cm)) = (
        col("id"),
        col("x"),
        col("y"),
        col("lon_deg"),
        col("lat_deg"),
        col("mass_msun"),
    ) else {
        return Err(bad("lacks one of the columns id, x, y, lon_deg, lat_deg, mass_msun; give the NAME-truth.csv that cairn synth wrote.".into()));
    };
    let mut cores = Vec::new();
    // Each id's line, for a repeated row or id.
    let mut seen: std::collections::HashMap<i64, usize> = std::collections::HashMap::new();
    for (n, l) in lines {
        let cells: Vec<&str> = l.split(',').collect();
        let num = |i: usize| -> Result<f64> {
            cells
                .get(i)
                .and_then(|v| v.trim().parse::<f64>().ok())
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    bad(format!(
                        "line {} has no number in column '{}'; give the NAME-truth.csv that cairn synth wrote, unedited.",
                        n + 1,
                        cols[i]
                    ))
                })
        };
        let id = num(ci)?;
        cores.push(TrueCore {
            id: id as i64,
            x: num(cx)?,
            y: num(cy)?,
            lon: num(clon)?,
            lat: num(clat)?,
            mass: num(cm)?,
        });
        if !(cores.last().is_some_and(|c| c.mass > 0.0)) {
            return Err(bad(format!(
                "line {} has a mass that is not positive; give the NAME-truth.csv that cairn synth wrote, unedited.",
                n + 1
            )));
        }
        if let Some(first) = seen.insert(id as i64, n + 1) {
            return Err(bad(format!(
                "line {} repeats the id {} of line {first}, so some cores would count twice; give the NAME-truth.csv that cairn synth wrote, unedited.",
                n + 1,
                id as i64
            )));
        }
    }
    if cores.is_empty() {
        return Err(bad(
            "holds no injected core; give the NAME-truth.csv that cairn synth wrote.".into(),
        ));
    }
    // The record beside the table must be of the same injection: an injection's record names
    // the map it wrote, which the table names too.
    let spec = read_spec(path).and_then(|spec| {
        match (
            spec.pointer("/injected_map/sha256").and_then(|v| v.as_str()),
            &map_sha256,
        ) {
            (Some(theirs), Some(ours)) if theirs != ours => Err(format!(
                "{} is the record of another injection (its injected map has SHA-256 {}..., the truth table's {}...); keep the NAME-spec.json written with this NAME-truth.csv beside it",
                spec_path(path).unwrap_or_default().display(),
                short(theirs),
                short(ours)
            )),
            _ => Ok(spec),
        }
    });
    // A table with rows taken out (or added) holds another number of cores than its record:
    // the random population's and the cores placed by hand (a synth specification's).
    if let Some(count) = spec
        .as_ref()
        .ok()
        .and_then(|s| {
            let random = s.pointer("/population/count").and_then(|v| v.as_u64())?;
            let placed = s
                .pointer("/cores")
                .and_then(|v| v.as_array())
                .map_or(0, Vec::len);
            Some(random + placed as u64)
        })
        .filter(|&c| c != cores.len() as u64)
    {
        return Err(bad(format!(
            "holds {} cores, but its record {} says {count} were injected; give the NAME-truth.csv that cairn synth wrote with that record, unedited.",
            cores.len(),
            spec_path(path).unwrap_or_default().display()
        )));
    }
    Ok(Truth {
        path: path.to_path_buf(),
        cores,
        map_sha256,
        map_name,
        spec,
    })
}

/// The injection record's path beside a truth table: `NAME-spec.json` for `NAME-truth.csv`.
fn spec_path(truth: &Path) -> Option<PathBuf> {
    let name = truth.file_name()?.to_str()?.strip_suffix("-truth.csv")?;
    Some(truth.with_file_name(format!("{name}-spec.json")))
}

/// A number at a JSON pointer.
fn num(v: &serde_json::Value, pointer: &str) -> Option<f64> {
    v.pointer(pointer).and_then(|x| x.as_f64())
}

/// Whether two recorded values differ beyond the rounding of their records.
fn differ(a: f64, b: f64) -> bool {
    (a - b).abs() > 1e-9 * a.abs().max(b.abs())
}

/// The first twelve hexadecimal digits of a SHA-256, for messages.
fn short(sha: &str) -> String {
    sha.chars().take(12).collect()
}

/// The injection record beside a truth table.
fn read_spec(truth: &Path) -> std::result::Result<serde_json::Value, String> {
    let spec = spec_path(truth)
        .ok_or("the truth table is not named NAME-truth.csv, so its NAME-spec.json is unknown")?;
    let text = std::fs::read_to_string(&spec).map_err(|e| {
        format!(
            "{} cannot be read ({e}); keep NAME-spec.json beside NAME-truth.csv",
            spec.display()
        )
    })?;
    serde_json::from_str(&text).map_err(|e| {
        format!(
            "{} is not JSON ({e}); give the NAME-spec.json that cairn synth wrote with NAME-truth.csv",
            spec.display()
        )
    })
}

/// A leaf of the run's catalogue.
#[derive(Debug, Clone, PartialEq)]
pub struct Leaf {
    /// Structure id.
    pub id: i64,
    /// Longitude of the peak \[deg\] in the map's frame.
    pub lon: f64,
    /// Latitude of the peak \[deg\].
    pub lat: f64,
    /// Mass of the whole footprint \[M_sun\] (NaN if unknown).
    pub mass: f64,
    /// Mass above the merge level \[M_sun\] (NaN if unknown).
    pub mass_excess: f64,
}

/// The run being scored.
#[derive(Debug, Clone)]
pub struct Run {
    /// The catalogue file.
    pub catalogue: PathBuf,
    /// Its leaves.
    pub leaves: Vec<Leaf>,
    /// SHA-256 of the run's input map.
    pub input_sha256: String,
    /// Beam FWHM \[arcsec\], geometric mean of the axes.
    pub beam_fwhm_arcsec: f64,
    /// The run record's `physics` object (the assumptions that turned the map into masses).
    pub physics: serde_json::Value,
    /// The kind of the map's unit as the run record names it (`map.unit_kind`).
    pub unit_kind: String,
    /// The run record's `other_inputs` (temperature map and others, with their SHA-256).
    pub other_inputs: serde_json::Value,
    /// The run record's `parameters` (thresholds and connectivity).
    pub parameters: serde_json::Value,
    /// The map's unit as the run read it (`map.unit`).
    pub unit: Option<String>,
    /// The beam the map's values refer to in the conversion to masses: the file's own beam
    /// (the run record's `common_resolution.input_beam` for a run on a map smoothed to a
    /// common resolution, whose Jy/beam values were rescaled to the new beam and so convert
    /// to the same masses; else its `beam`).
    pub beam: serde_json::Value,
    /// The run record's `input` (the map's SHA-256, HDU and plane).
    pub input: serde_json::Value,
}

/// Reads a run folder (or its structures.csv with run.json beside it).
pub fn read_run(path: &Path) -> Result<Run> {
    read_run_with(path, true)
}

/// Reads a baseline run: a run of the map before injection, whose leaves' peaks are all that
/// is used (it needs no distance, so its masses may be missing: they are then NaN).
pub fn read_baseline(path: &Path) -> Result<Run> {
    read_run_with(path, false)
}

fn read_run_with(path: &Path, need_mass: bool) -> Result<Run> {
    let (csv, run_path) = crate::compare::run_files(path);
    let catalogue = std::fs::read_to_string(&csv).map_err(|e| {
        Error::input(
            &csv,
            format!(
                "cannot be read ({e}); give a run folder or a catalogue written by cairn segment."
            ),
        )
    })?;
    let run_text = std::fs::read_to_string(&run_path).map_err(|e| {
        Error::input(
            &run_path,
            format!("cannot be read ({e}); scoring against a truth table needs the run record beside the catalogue, so give the whole run folder."),
        )
    })?;
    let run = crate::compare::matching_run(&csv, &catalogue, &run_path, &run_text)?;
    let input_sha256 = run
        .pointer("/input/sha256")
        .and_then(|v| v.as_str())
        .map(str::to_string)
        .ok_or_else(|| {
            Error::input(
                &run_path,
                "records no SHA-256 of its input map; run cairn segment again.",
            )
        })?;
    let beam = |k: &str| run.pointer(&format!("/beam/{k}")).and_then(|v| v.as_f64());
    let (Some(maj), Some(min)) = (beam("major_deg"), beam("minor_deg")) else {
        return Err(Error::input(
            &run_path,
            "records no beam, so a match radius of one beam cannot be set; run cairn segment again with --beam.",
        ));
    };
    let beam_fwhm_arcsec = (maj * min).sqrt() * 3600.0;
    let (header, rows) = crate::table::read_catalogue_csv(&csv, &catalogue)?;
    let col = |name: &str| header.iter().position(|h| h == name);
    // The peak in the map's own frame, as segment names it (`segment::sky_names`).
    let peak_cols = [
        ("ra_peak", "dec_peak"),
        ("glon_peak", "glat_peak"),
        ("lon_peak", "lat_peak"),
    ]
    .iter()
    .find_map(|(a, b)| Some((col(a)?, col(b)?)));
    let (cm, cme) = (col("mass"), col("mass_excess"));
    let (Some(kind), Some(id), Some((clon, clat)), true) = (
        col("kind"),
        col("id"),
        peak_cols,
        !need_mass || (cm.is_some() && cme.is_some()),
    ) else {
        return Err(Error::input(
            &csv,
            "lacks the id, kind, peak sky position or mass columns: run cairn segment with --distance (and --temperature for emission maps) on a map with sky coordinates.",
        ));
    };
    let mut leaves = Vec::new();
    for (n, r) in rows.iter().enumerate() {
        if r.get(kind).map(String::as_str) != Some("leaf") {
            continue;
        }
        let num = |i: usize| crate::compare::catalogue_number(&csv, &header, r, n, i);
        leaves.push(Leaf {
            id: num(id)? as i64,
            lon: num(clon)?,
            lat: num(clat)?,
            mass: cm.map(num).transpose()?.unwrap_or(f64::NAN),
            mass_excess: cme.map(num).transpose()?.unwrap_or(f64::NAN),
        });
    }
    Ok(Run {
        catalogue: csv,
        leaves,
        input_sha256,
        beam_fwhm_arcsec,
        physics: run
            .get("physics")
            .cloned()
            .unwrap_or(serde_json::Value::Null),
        unit: run
            .pointer("/map/unit")
            .and_then(|v| v.as_str())
            .map(str::to_string),
        beam: run
            .pointer("/common_resolution/input_beam")
            .or_else(|| run.get("beam"))
            .cloned()
            .unwrap_or(serde_json::Value::Null),
        input: run.get("input").cloned().unwrap_or(serde_json::Value::Null),
        parameters: run
            .get("parameters")
            .cloned()
            .unwrap_or(serde_json::Value::Null),
        other_inputs: run
            .get("other_inputs")
            .cloned()
            .unwrap_or(serde_json::Value::Null),
        unit_kind: run
            .pointer("/map/unit_kind")
            .and_then(|v| v.as_str())
            .unwrap_or("")
            .to_string(),
    })
}

/// How [`assumption_differences`] begins its one sentence when the check could not be made.
const UNCHECKED: &str =
    "the run's physical assumptions could not be checked against the injection's: ";

/// The physical assumptions in which the run differs from the injection, one sentence each:
/// those that turn the map into masses, for the map's kind (the distance always; the dust
/// temperature, opacity law and wavelength for emission; N(H2)/A_V and A_V/A_K for extinction;
/// mu_H2 for column density and extinction, as it cancels for emission, where the column
/// density is inferred per unit of gas mass). Differences make the recovered masses, and so
/// their ratios to the true masses, scale by the factors said; the recovery of the cores is
/// unaffected. When the injection record is missing, one sentence says the check was not made.
pub fn assumption_differences(truth: &Truth, run: &Run) -> Vec<String> {
    let spec = match &truth.spec {
        Ok(s) => s,
        Err(why) => {
            return vec![format!("{UNCHECKED}{why}")];
        }
    };
    // The record of `synth --into` holds the assumptions at its top level; that of a
    // synthetic emission map made by `synth` holds them in `output.dust_emission`.
    let emission =
        |p: &str| num(spec, p).or_else(|| num(spec, &format!("/output/dust_emission{p}")));
    let mut out = Vec::new();
    let tidy = crate::units::tidy;
    if num(spec, "/distance_pc").is_none() {
        return vec![format!(
            "{UNCHECKED}{} records no distance, so it is not a record that cairn synth wrote; give the NAME-spec.json written with NAME-truth.csv",
            spec_name(&truth.path)
        )];
    }
    // How the map was read: its unit and the kind of quantity (the extinction band too).
    fn text<'a>(v: &'a serde_json::Value, p: &str) -> Option<&'a str> {
        v.pointer(p).and_then(|x| x.as_str())
    }
    // `synth --into` records the kind it read; plain `synth` says what it made.
    let kind_inj = text(spec, "/input/unit_kind").or(
        match (
            text(spec, "/output"),
            text(spec, "/output/dust_emission/unit"),
        ) {
            (Some("column_density"), _) => Some("H2 column density"),
            (_, Some("JyPerBeam")) => Some("flux density per beam"),
            (_, Some("MJyPerSr")) => Some("surface brightness"),
            _ => None,
        },
    );
    if let Some(kind_inj) = kind_inj
        && kind_inj != run.unit_kind
    {
        out.push(format!(
            "the run read the map as {} and the injection as {kind_inj}: the run's masses are not on the injection's scale; segment the map in the unit and extinction band the injection read it in (--unit, --extinction-band)",
            if run.unit_kind.is_empty() { "a map of no known quantity" } else { run.unit_kind.as_str() }
        ));
    } else if let (Some(u_inj), Some(u_run)) = (text(spec, "/input/unit"), run.unit.as_deref())
        && u_inj != u_run
    {
        out.push(format!(
            "the run read the map in '{u_run}' and the injection in '{u_inj}': the run's masses are not on the injection's scale; give segment the --unit the injection was given"
        ));
    }
    if let (Some(d_run), Some(d_inj)) =
        (num(&run.physics, "/distance_pc"), num(spec, "/distance_pc"))
        && differ(d_run, d_inj)
    {
        out.push(format!(
            "the run's distance is {} pc and the injection's {} pc: the run's masses are {} times what they would be at the injection's distance",
            tidy(d_run),
            tidy(d_inj),
            tidy((d_run / d_inj).powi(2))
        ));
    }
    let kind = run.unit_kind.as_str();
    let extinction = kind.contains("extinction");
    let column = kind == "H2 column density";
    if extinction || column {
        // synth renders the cores' columns with its --mu-h2 (recorded; records written before
        // the option existed used 2.8).
        let mu_inj = num(spec, "/mu_h2").unwrap_or(crate::physics::MU_H2);
        if let Some(mu_run) = num(&run.physics, "/mu_h2")
            && differ(mu_run, mu_inj)
        {
            out.push(format!(
                "the run's mu_H2 is {} and the injection's {}: the run's masses are {} times the injection's scale",
                tidy(mu_run),
                tidy(mu_inj),
                tidy(mu_run / mu_inj)
            ));
        }
    }
    if extinction {
        for (p_run, p_inj, what) in [
            ("/nh2_per_av_cm2", "/nh2_per_av_cm2", "N(H2)/A_V"),
            ("/av_per_ak", "/av_per_ak", "A_V/A_K"),
        ] {
            if what == "A_V/A_K" && !kind.contains("A_K") {
                continue;
            }
            if let (Some(a), Some(b)) = (num(&run.physics, p_run), num(spec, p_inj))
                && differ(a, b)
            {
                out.push(format!(
                    "the run's {what} is {} and the injection's {}: the run's masses are {} times the injection's scale",
                    tidy(a),
                    tidy(b),
                    tidy(a / b)
                ));
            }
        }
    }
    if !(extinction || column) {
        out.extend(emission_differences(spec, run, &emission));
    }
    out
}

/// Refuses a run that was not made on the map of the truth table.
pub fn check_same_map(truth: &Truth, run: &Run) -> Result<()> {
    let Some(sha) = &truth.map_sha256 else {
        return Err(Error::input(
            &truth.path,
            "does not record the SHA-256 of its map (no '# map NAME sha256 HEX' line), so the run cannot be checked to be of that map; give the NAME-truth.csv that cairn synth wrote.",
        ));
    };
    if *sha != run.input_sha256 {
        return Err(Error::input(
            &truth.path,
            format!(
                "belongs to the map {} (SHA-256 {}...), but the run {} was made on another map (SHA-256 {}...); segment that injected map and score its run, or give the truth table of the map the run was made on.",
                truth.map_name.as_deref().unwrap_or("?"),
                short(sha),
                run.catalogue.display(),
                short(&run.input_sha256)
            ),
        ));
    }
    Ok(())
}

/// The emission maps' differences: the run's masses over the injection's scale are
/// kappa_inj(nu_inj) B(nu_inj, T_inj) / (kappa_run(nu_run) B(nu_run, T_run)) (the optically
/// thin conversion, Hildebrand 1983), times Omega_inj / Omega_run for a map per beam (its
/// values are divided by the beam's solid angle). One sentence naming what differs and that
/// factor; with a temperature map on either side, what differs without a factor (it varies
/// from pixel to pixel).
fn emission_differences(
    spec: &serde_json::Value,
    run: &Run,
    emission: &dyn Fn(&str) -> Option<f64>,
) -> Vec<String> {
    use crate::physics::{DustOpacity, planck_nu};
    let tidy = crate::units::tidy;
    let mut out = Vec::new();
    let mut what: Vec<String> = Vec::new();
    // Temperatures: one value, or a map (by its SHA-256).
    let t_run_text = run.physics.get("temperature").and_then(|v| v.as_str());
    // The number (temperature_k), or the text ("14 K") in run records of earlier versions.
    let t_run = run
        .physics
        .get("temperature_k")
        .and_then(|v| v.as_f64())
        .or_else(|| {
            t_run_text
                .and_then(|t| t.strip_suffix(" K"))
                .and_then(|v| v.trim().parse::<f64>().ok())
        });
    let t_inj = emission("/temperature_k");
    let sha =
        |v: &serde_json::Value, p: &str| v.pointer(p).and_then(|x| x.as_str()).map(str::to_string);
    let map_inj = sha(spec, "/temperature_map/sha256");
    let map_run = sha(&run.other_inputs, "/temperature_map/sha256");
    let same_values = same_map(
        &spec["temperature_map"],
        &run.other_inputs["temperature_map"],
    );
    let name = spec
        .pointer("/temperature_map/path")
        .and_then(|x| x.as_str())
        .unwrap_or("?");
    let mut per_pixel = false;
    match (t_run, t_inj, &map_inj) {
        (Some(a), Some(b), _) => {
            if differ(a, b) {
                what.push(format!(
                    "dust temperature {} K against {} K",
                    tidy(a),
                    tidy(b)
                ));
            }
        }
        (None, Some(b), _) => {
            per_pixel = true;
            out.push(match t_run_text {
                Some(t) => format!(
                    "the run's dust temperature is {t} and the injection's a single {} K: the run's masses differ from the injection's scale wherever the temperatures differ",
                    tidy(b)
                ),
                None => format!(
                    "the run records no dust temperature and the injection used {} K",
                    tidy(b)
                ),
            });
        }
        (Some(_), None, Some(_)) => {
            per_pixel = true;
            out.push(format!(
                "the run's dust temperature is {} and the injection used the temperature map {name}: the run's masses differ from the injection's scale wherever the temperatures differ",
                t_run_text.unwrap_or("?")
            ));
        }
        (None, None, Some(s_inj)) => {
            per_pixel = true;
            match &map_run {
                Some(_) if same_values => {}
                Some(s_run) => out.push(format!(
                    "the run's temperature map (file SHA-256 {}...) is not the injection's, {name} (file SHA-256 {}...), nor holds the same values: the run's masses differ from the injection's scale wherever the temperatures differ",
                    short(s_run),
                    short(s_inj)
                )),
                None => out.push(format!(
                    "the run does not record its temperature map's SHA-256, so it cannot be checked to be the injection's, {name}; segment the injected map again"
                )),
            }
        }
        _ => per_pixel = true,
    }
    // Opacity laws, compared where they act: at each side's frequency.
    let law = |f: &dyn Fn(&str) -> Option<f64>| {
        Some(DustOpacity {
            kappa0_cm2_per_g: f("/opacity/kappa0_cm2_per_g")?,
            nu0_hz: f("/opacity/nu0_hz")?,
            beta: f("/opacity/beta")?,
        })
    };
    let k_run = law(&|p| num(&run.physics, p));
    let k_inj = law(emission);
    let nu_run = num(&run.physics, "/wavelength_um").map(|w| crate::units::C_LIGHT / (w * 1e-6));
    let nu_inj = num(spec, "/input/wavelength_m")
        .or_else(|| num(spec, "/output/dust_emission/wavelength_um").map(|w| w * 1e-6))
        .map(|w| crate::units::C_LIGHT / w);
    let (Some(k_run), Some(k_inj), Some(nu_run), Some(nu_inj)) = (k_run, k_inj, nu_run, nu_inj)
    else {
        return out;
    };
    if differ(nu_run, nu_inj) {
        what.push(format!(
            "wavelength {} um against {} um",
            tidy(crate::units::C_LIGHT / nu_run * 1e6),
            tidy(crate::units::C_LIGHT / nu_inj * 1e6)
        ));
    }
    let (kr, ki) = (k_run.kappa_si(nu_run), k_inj.kappa_si(nu_inj));
    if differ(kr, ki) {
        what.push(format!(
            "dust opacity {} cm2/g against {} cm2/g at the map's frequency",
            tidy(kr * 10.0),
            tidy(ki * 10.0)
        ));
    }
    // A map per beam is divided by the beam's solid angle, proportional to major x minor.
    let mut omega = 1.0;
    if run.unit_kind == "flux density per beam" {
        let b_run = (num(&run.beam, "/major_deg"), num(&run.beam, "/minor_deg"));
        let b_inj = match (
            num(spec, "/input/beam/major_deg"),
            num(spec, "/input/beam/minor_deg"),
        ) {
            (Some(a), Some(b)) => (Some(a * 3600.0), Some(b * 3600.0)),
            _ => (
                num(spec, "/beam_fwhm_arcsec"),
                num(spec, "/beam_fwhm_arcsec"),
            ),
        };
        if let ((Some(a), Some(b)), (Some(c), Some(d))) = (b_run, b_inj) {
            let (a, b) = (a * 3600.0, b * 3600.0);
            if differ(a * b, c * d) {
                what.push(format!(
                    "beam {}\" x {}\" against {}\" x {}\"",
                    tidy(a),
                    tidy(b),
                    tidy(c),
                    tidy(d)
                ));
            }
            omega = (c * d) / (a * b);
        }
    }
    if what.is_empty() {
        return out;
    }
    let factor = match (t_run, t_inj) {
        (Some(tr), Some(ti)) if !per_pixel => {
            Some(ki * planck_nu(nu_inj, ti) / (kr * planck_nu(nu_run, tr)) * omega)
        }
        _ => None,
    };
    out.push(format!(
        "the run converts the map to masses otherwise than the injection ({}): the run's masses are {} the injection's scale",
        what.join("; "),
        match factor {
            Some(f) if f.is_finite() => format!("{} times", tidy(f)),
            _ => "not on".to_string(),
        }
    ));
    out
}

/// The injection record's name for a truth table, for messages.
fn spec_name(truth: &Path) -> String {
    spec_path(truth)
        .and_then(|p| p.file_name().map(|n| n.to_string_lossy().into_owned()))
        .unwrap_or_else(|| "the injection record".into())
}

/// Refuses a baseline run that was not made on the map the cores were injected into (the
/// input recorded in the injection's `NAME-spec.json`), and returns one sentence per threshold
/// in which it differs from the scored run (its leaves are then not those the scored run would
/// have found without the cores).
pub fn check_baseline(truth: &Truth, run: &Run, baseline: &Run) -> Result<Vec<String>> {
    let spec = truth.spec.as_ref().map_err(|why| {
        Error::input(
            &truth.path,
            format!("has no injection record beside it ({why}), so the baseline run cannot be checked to be of the map before injection; keep NAME-spec.json beside NAME-truth.csv."),
        )
    })?;
    let Some(before) = spec.pointer("/input/sha256").and_then(|v| v.as_str()) else {
        return Err(Error::input(
            &truth.path,
            "belongs to a map that was not made by injection into another (its NAME-spec.json names no input map), so there is no map before injection for --baseline; leave out --baseline.",
        ));
    };
    let same_hdu_plane = ["hdu", "plane"].iter().all(|k| {
        match (spec.pointer(&format!("/input/{k}")), baseline.input.get(*k)) {
            (Some(a), Some(b)) => a == b,
            _ => true,
        }
    });
    if baseline.input_sha256 == before && !same_hdu_plane {
        return Err(Error::input(
            &baseline.catalogue,
            format!(
                "is a run of another HDU or plane (HDU {}, plane {}) of the file the cores were injected into (HDU {}, plane {}); give --baseline a run of the map before injection with the injection's --hdu and --plane.",
                baseline
                    .input
                    .get("hdu")
                    .unwrap_or(&serde_json::Value::Null),
                baseline
                    .input
                    .get("plane")
                    .unwrap_or(&serde_json::Value::Null),
                spec.pointer("/input/hdu")
                    .unwrap_or(&serde_json::Value::Null),
                spec.pointer("/input/plane")
                    .unwrap_or(&serde_json::Value::Null),
            ),
        ));
    }
    if baseline.input_sha256 != before {
        return Err(Error::input(
            &baseline.catalogue,
            format!(
                "is a run of another map (SHA-256 {}...) than the one the cores were injected into (SHA-256 {}...); give --baseline a run of the map before injection.",
                short(&baseline.input_sha256),
                short(before)
            ),
        ));
    }
    let mut differences = Vec::new();
    for key in ["floor", "prominence", "min_area"] {
        let v = |r: &Run| {
            r.parameters
                .pointer(&format!("/{key}/value"))
                .and_then(|x| x.as_f64())
        };
        if let (Some(a), Some(b)) = (v(run), v(baseline))
            && differ(a, b)
        {
            differences.push(format!(
                "the baseline run's {key} ({}) is not the scored run's ({}): give both runs the same thresholds, such as segment --thresholds-from BASELINE_RUN for the injected map",
                crate::units::tidy(b),
                crate::units::tidy(a)
            ));
        }
    }
    let conn = |r: &Run| r.parameters.get("connectivity").cloned();
    if conn(run) != conn(baseline) {
        differences.push("the baseline run's connectivity is not the scored run's".into());
    }
    Ok(differences)
}

/// One-to-one matching of `cores` to `leaves` (positions in degrees) within `radius_arcsec`:
/// for each core, the index of its leaf and their separation \[arcsec\], or `None`. Pairs are
/// taken in order of increasing separation, ties by core index then leaf index.
pub fn match_cores(
    cores: &[(f64, f64)],
    leaves: &[(f64, f64)],
    radius_arcsec: f64,
) -> Vec<Option<(usize, f64)>> {
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, c) in cores.iter().enumerate() {
        for (j, l) in leaves.iter().enumerate() {
            let d = separation_arcsec(c.0, c.1, l.0, l.1);
            if d <= radius_arcsec {
                pairs.push((d, i, j));
            }
        }
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
    let mut out = vec![None; cores.len()];
    let mut taken = vec![false; leaves.len()];
    for (d, i, j) in pairs {
        if out[i].is_none() && !taken[j] {
            out[i] = Some((j, d));
            taken[j] = true;
        }
    }
    out
}

/// The Wilson (1927) score interval of a binomial fraction `k` of `n` at `z` standard
/// deviations: (low, high). (0, 1) when `n` is 0.
pub fn wilson_interval(k: usize, n: usize, z: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let (k, n) = (k as f64, n as f64);
    let p = k / n;
    let z2 = z * z;
    let centre = (k + z2 / 2.0) / (n + z2);
    let half = z * n.sqrt() / (n + z2) * (p * (1.0 - p) + z2 / (4.0 * n)).sqrt();
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

/// One bin of true mass.
#[derive(Debug, Clone, PartialEq)]
pub struct Bin {
    /// Lower edge \[M_sun\].
    pub lo: f64,
    /// Upper edge \[M_sun\].
    pub hi: f64,
    /// Injected cores in the bin.
    pub injected: usize,
    /// Recovered among them.
    pub recovered: usize,
    /// Recovered fraction.
    pub fraction: f64,
    /// Wilson 68.27% interval, low end.
    pub ci_lo: f64,
    /// Wilson 68.27% interval, high end.
    pub ci_hi: f64,
}

/// Completeness per bin of log10 true mass of width `bin_dex`, edges at multiples of it, from
/// the lowest occupied bin to the highest (empty bins between are kept, with NaN fractions).
pub fn bins(masses: &[f64], recovered: &[bool], bin_dex: f64) -> Vec<Bin> {
    let index = |m: f64| (m.log10() / bin_dex).floor() as i64;
    let (Some(lo), Some(hi)) = (
        masses.iter().map(|&m| index(m)).min(),
        masses.iter().map(|&m| index(m)).max(),
    ) else {
        return Vec::new();
    };
    (lo..=hi)
        .map(|k| {
            let (mut n, mut r) = (0, 0);
            for (m, &ok) in masses.iter().zip(recovered) {
                if index(*m) == k {
                    n += 1;
                    r += usize::from(ok);
                }
            }
            let (ci_lo, ci_hi) = if n > 0 {
                wilson_interval(r, n, 1.0)
            } else {
                (f64::NAN, f64::NAN)
            };
            Bin {
                lo: 10f64.powf(k as f64 * bin_dex),
                hi: 10f64.powf((k + 1) as f64 * bin_dex),
                injected: n,
                recovered: r,
                fraction: if n > 0 { r as f64 / n as f64 } else { f64::NAN },
                ci_lo,
                ci_hi,
            }
        })
        .collect()
}

/// The lower edge of the lowest bin from which every occupied bin above has a fraction of at
/// least `level`, walking down from the most massive; `None` if the most massive occupied bin
/// is already below it.
pub fn completeness_limit(bins: &[Bin], level: f64) -> Option<f64> {
    let mut limit = None;
    for b in bins.iter().rev() {
        if b.injected == 0 {
            continue;
        }
        if b.fraction >= level {
            limit = Some(b.lo);
        } else {
            break;
        }
    }
    limit
}

/// The completeness limit at `level` ([`completeness_limit`]) raised to the least mass
/// injected in its bin when that is higher (nothing lighter was tried there), and whether its
/// bin is the lowest occupied one (then the true limit lies at or below that mass).
pub fn limit_of(bins: &[Bin], masses: &[f64], level: f64) -> (Option<f64>, bool) {
    let Some(lo) = completeness_limit(bins, level) else {
        return (None, false);
    };
    let Some(bin) = bins.iter().find(|b| b.lo == lo) else {
        return (Some(lo), false);
    };
    let least = masses
        .iter()
        .copied()
        .filter(|&m| m >= bin.lo * (1.0 - 1e-12) && m < bin.hi)
        .fold(f64::INFINITY, f64::min);
    let lowest = bins.iter().find(|b| b.injected > 0).map(|b| b.lo) == Some(lo);
    (Some(least.clamp(bin.lo, bin.hi)), lowest)
}

/// The fewest counted cores [`logistic_fit`] fits: fewer leave two parameters barely
/// constrained.
pub const LOGISTIC_MIN_CORES: usize = 5;

/// Newton steps [`logistic_fit`] takes at most.
pub const LOGISTIC_MAX_STEPS: usize = 100;

/// An unbinned maximum-likelihood logistic fit of recovery against true mass
/// ([`logistic_fit`]): P(recovered) = 1 / (1 + exp(-(a + b x))), x = log10(M / Msun).
#[derive(Debug, Clone, PartialEq)]
pub struct LogisticFit {
    /// Intercept a.
    pub a: f64,
    /// Slope b \[per dex of mass\]; positive (recovery rising with mass).
    pub b: f64,
    /// Standard error of a (inverse Fisher information).
    pub a_err: f64,
    /// Standard error of b (inverse Fisher information).
    pub b_err: f64,
    /// Covariance of a and b (inverse Fisher information).
    pub cov_ab: f64,
    /// log10 of the mass at 50% recovery \[Msun\]: -a / b.
    pub log10_m50: f64,
    /// Its standard error \[dex\] (delta method).
    pub log10_m50_err: f64,
    /// log10 of the mass at 90% recovery \[Msun\]: (ln 9 - a) / b.
    pub log10_m90: f64,
    /// Its standard error \[dex\] (delta method).
    pub log10_m90_err: f64,
    /// The least and the greatest true mass fitted \[Msun\].
    pub mass_range: (f64, f64),
    /// Cores fitted, and how many of them were recovered.
    pub n: usize,
    /// Recovered among the cores fitted.
    pub recovered: usize,
    /// Newton steps taken.
    pub steps: usize,
}

impl LogisticFit {
    /// The mass at 50% recovery \[Msun\].
    pub fn m50(&self) -> f64 {
        10f64.powf(self.log10_m50)
    }

    /// The mass at 90% recovery \[Msun\].
    pub fn m90(&self) -> f64 {
        10f64.powf(self.log10_m90)
    }

    /// Whether the 50% mass lies outside the masses fitted (an extrapolation of the curve).
    pub fn m50_extrapolated(&self) -> bool {
        outside(self.log10_m50, self.mass_range)
    }

    /// Whether the 90% mass lies outside the masses fitted (an extrapolation of the curve).
    pub fn m90_extrapolated(&self) -> bool {
        outside(self.log10_m90, self.mass_range)
    }

    /// Whether the slope is less than twice its standard error: recovery hardly rises with
    /// mass among the cores fitted, so the curve and its masses are poorly constrained
    /// (two standard errors: common practice).
    pub fn weak(&self) -> bool {
        self.b < 2.0 * self.b_err
    }

    /// The fitted probability of recovery of a core of `mass` \[Msun\].
    pub fn probability(&self, mass: f64) -> f64 {
        sigmoid(self.a + self.b * mass.log10())
    }
}

fn outside(log10_m: f64, (lo, hi): (f64, f64)) -> bool {
    log10_m < lo.log10() || log10_m > hi.log10()
}

/// Why [`logistic_fit`] gives no fit.
#[derive(Debug, Clone, PartialEq)]
pub enum NoLogisticFit {
    /// Fewer than [`LOGISTIC_MIN_CORES`] counted cores.
    TooFew {
        /// Counted cores.
        n: usize,
    },
    /// Every counted core was recovered.
    AllRecovered {
        /// Counted cores.
        n: usize,
    },
    /// No counted core was recovered.
    NoneRecovered {
        /// Counted cores.
        n: usize,
    },
    /// Every counted core has the same true mass.
    OneMass {
        /// That mass \[Msun\].
        mass: f64,
    },
    /// No missed core is heavier than a recovered one: the likelihood grows without bound
    /// as the slope does, so no maximum exists; the limit lies between the two masses.
    Separated {
        /// The heaviest missed core's true mass \[Msun\].
        heaviest_missed: f64,
        /// The lightest recovered core's true mass \[Msun\].
        lightest_recovered: f64,
    },
    /// No recovered core is heavier than a missed one: recovery falls with mass.
    Falling {
        /// The heaviest recovered core's true mass \[Msun\].
        heaviest_recovered: f64,
        /// The lightest missed core's true mass \[Msun\].
        lightest_missed: f64,
    },
    /// The fitted slope is not positive: recovery does not rise with mass.
    NotRising {
        /// The fitted slope.
        b: f64,
        /// Its standard error.
        b_err: f64,
    },
    /// Newton's method did not converge in [`LOGISTIC_MAX_STEPS`] steps.
    NoConvergence,
    /// The 90% or the 50% mass lies more than [`LOGISTIC_MAX_DEX_OUTSIDE`] outside the
    /// injected masses (or is no finite number): the curve is too weakly held by the cores
    /// to give a limit.
    FarOutside {
        /// The fitted slope and its standard error.
        b: f64,
        b_err: f64,
        /// The least and the greatest true mass fitted \[Msun\].
        mass_range: (f64, f64),
    },
}

/// How far (dex) outside the injected masses a fitted 50% or 90% mass may lie and still be
/// given (flagged as an extrapolation); beyond it, no fit is given (cairn's convention).
pub const LOGISTIC_MAX_DEX_OUTSIDE: f64 = 2.0;

/// A mass for the completeness texts: three decimals in the usual range, else three
/// significant digits with an exponent (a fit far off the injected masses stays readable).
pub fn fmt_msun(x: f64) -> String {
    if x.is_finite() && (1e-3..1e5).contains(&x.abs()) {
        format!("{x:.3}")
    } else {
        format!("{x:.3e}")
    }
}

/// A binned 90% limit to the digits its bins justify: it is known to a bin, a factor
/// 10^`bin_dex` in mass, so it gets the fewest significant digits (two at least) whose last
/// place is finer than that step: two for bins wider than log10 1.1 = 0.041 dex (a step of 10%
/// or more), three for narrower bins down to 0.005 dex. "6.1" for 6.068 in bins of 0.2 dex, not "6.068".
pub fn fmt_binned_limit(m: f64, bin_dex: f64) -> String {
    if !(m.is_finite() && m > 0.0 && bin_dex.is_finite() && bin_dex > 0.0) {
        return fmt_msun(m);
    }
    let step = 10f64.powf(bin_dex) - 1.0;
    let digits = (1.0 + (-step.log10()).ceil()).max(2.0) as i32;
    let decimals = (digits - 1 - m.log10().floor() as i32).max(0) as usize;
    if (1e-3..1e5).contains(&m) {
        format!("{m:.decimals$}")
    } else {
        format!("{m:.*e}", (digits - 1) as usize)
    }
}

impl std::fmt::Display for NoLogisticFit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            NoLogisticFit::TooFew { n } => write!(
                f,
                "only {n} counted {}, too few for a fit (it needs {LOGISTIC_MIN_CORES}); inject more cores",
                if *n == 1 { "core" } else { "cores" }
            ),
            NoLogisticFit::AllRecovered { n } => write!(
                f,
                "all {n} counted cores were recovered, so recovery does not fall off within the injected masses; inject lighter cores"
            ),
            NoLogisticFit::NoneRecovered { n } => write!(
                f,
                "none of the {n} counted cores was recovered; inject heavier cores"
            ),
            NoLogisticFit::OneMass { mass } => write!(
                f,
                "every counted core has the same true mass ({mass:.3} Msun), so recovery cannot be fitted against mass"
            ),
            NoLogisticFit::Separated {
                heaviest_missed,
                lightest_recovered,
            } if heaviest_missed == lightest_recovered => write!(
                f,
                "the recovered and missed cores are separated in mass: the limit lies at {heaviest_missed:.3} Msun, the mass of both the heaviest missed and the lightest recovered core, and the likelihood has no maximum (its slope grows without bound); inject more cores around this mass"
            ),
            NoLogisticFit::Separated {
                heaviest_missed,
                lightest_recovered,
            } => write!(
                f,
                "the recovered and missed cores are separated in mass: the limit lies between {heaviest_missed:.3} and {lightest_recovered:.3} Msun (the heaviest missed and the lightest recovered core), and the likelihood has no maximum (its slope grows without bound); inject more cores between these masses"
            ),
            NoLogisticFit::Falling {
                heaviest_recovered,
                lightest_missed,
            } => write!(
                f,
                "recovery does not rise with mass: every recovered core ({} Msun at most) is {} every missed one ({} Msun at least)",
                fmt_msun(*heaviest_recovered),
                if heaviest_recovered == lightest_missed {
                    "no heavier than"
                } else {
                    "lighter than"
                },
                fmt_msun(*lightest_missed)
            ),
            NoLogisticFit::FarOutside {
                b,
                b_err,
                mass_range,
            } => write!(
                f,
                "the fitted curve (slope b = {b:.3} +- {b_err:.3}) puts its 90% or 50% mass more than {} dex outside the injected masses ({} - {} Msun), too weakly held by the cores to give a limit; inject more cores, and fainter ones, around the limit",
                LOGISTIC_MAX_DEX_OUTSIDE,
                fmt_msun(mass_range.0),
                fmt_msun(mass_range.1)
            ),
            NoLogisticFit::NotRising { b, b_err } => write!(
                f,
                "recovery does not rise with mass: the fitted slope b = {b:.3} +- {b_err:.3} is not positive"
            ),
            NoLogisticFit::NoConvergence => write!(
                f,
                "the fit did not converge in {LOGISTIC_MAX_STEPS} Newton steps"
            ),
        }
    }
}

/// 1 / (1 + exp(-z)), without overflow.
fn sigmoid(z: f64) -> f64 {
    if z >= 0.0 {
        1.0 / (1.0 + (-z).exp())
    } else {
        let e = z.exp();
        e / (1.0 + e)
    }
}

/// ln(1 + exp(t)), without overflow.
fn softplus(t: f64) -> f64 {
    t.max(0.0) + (-t.abs()).exp().ln_1p()
}

/// The log-likelihood of (a, b), the score (its gradient) and the Fisher information
/// (minus its Hessian, which for the logistic model does not depend on the outcomes).
fn logistic_terms(x: &[f64], y: &[bool], a: f64, b: f64) -> (f64, [f64; 2], [f64; 3]) {
    let mut ll = 0.0;
    let (mut ga, mut gb) = (0.0, 0.0);
    let (mut iaa, mut iab, mut ibb) = (0.0, 0.0, 0.0);
    for (&xi, &yi) in x.iter().zip(y) {
        let z = a + b * xi;
        let p = sigmoid(z);
        let r = f64::from(u8::from(yi)) - p;
        ll -= if yi { softplus(-z) } else { softplus(z) };
        ga += r;
        gb += r * xi;
        let w = p * (1.0 - p);
        iaa += w;
        iab += w * xi;
        ibb += w * xi * xi;
    }
    (ll, [ga, gb], [iaa, iab, ibb])
}

/// The unbinned completeness: a maximum-likelihood fit of the logistic model
/// P(recovered) = 1 / (1 + exp(-(a + b x))), x = log10(M / Msun), to each core's outcome
/// (`recovered`, 0 or 1) against its true mass `masses` \[Msun\], without bins.
///
/// Fitted by Newton's method (iteratively reweighted least squares) in f64 from a = the
/// log-odds of the recovered fraction, b = 0, until both steps are below 1e-12 relative (of
/// 1 + |a| and 1 + |b|) or [`LOGISTIC_MAX_STEPS`] steps, halving a step that lowers the
/// likelihood. The variances of a and b and their covariance are the inverse of the
/// Fisher information at the maximum (the standard errors are their variances' square
/// roots). The masses at recovery p, log10 M_p = (ln(p / (1 - p)) - a) / b, have 1-sigma
/// errors by the delta method from that covariance:
/// var(log10 M_p) = (var(a) + 2 log10 M_p cov(a, b) + (log10 M_p)^2 var(b)) / b^2.
///
/// The model assumes that recovery rises monotonically with mass along a logistic curve in
/// log mass (a common choice, not a law). No fit, with the reason, when there are fewer than
/// [`LOGISTIC_MIN_CORES`] cores, all or none were recovered, all have one mass, the recovered
/// and missed cores are separated in mass (no missed core heavier than a recovered one, or the
/// reverse, with ties: the maximum does not exist), the slope is not positive, or the steps
/// do not converge.
pub fn logistic_fit(
    masses: &[f64],
    recovered: &[bool],
) -> std::result::Result<LogisticFit, NoLogisticFit> {
    let n = masses.len();
    let k = recovered.iter().filter(|&&r| r).count();
    if n < LOGISTIC_MIN_CORES {
        return Err(NoLogisticFit::TooFew { n });
    }
    if k == n {
        return Err(NoLogisticFit::AllRecovered { n });
    }
    if k == 0 {
        return Err(NoLogisticFit::NoneRecovered { n });
    }
    let extreme = |want: bool, max: bool| {
        masses
            .iter()
            .zip(recovered)
            .filter(|(_, r)| **r == want)
            .map(|(&m, _)| m)
            .fold(
                if max {
                    f64::NEG_INFINITY
                } else {
                    f64::INFINITY
                },
                |a, m| {
                    if max { a.max(m) } else { a.min(m) }
                },
            )
    };
    let lo = masses.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = masses.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if lo == hi {
        return Err(NoLogisticFit::OneMass { mass: lo });
    }
    let (heaviest_missed, lightest_recovered) = (extreme(false, true), extreme(true, false));
    if heaviest_missed <= lightest_recovered {
        return Err(NoLogisticFit::Separated {
            heaviest_missed,
            lightest_recovered,
        });
    }
    let (heaviest_recovered, lightest_missed) = (extreme(true, true), extreme(false, false));
    if heaviest_recovered <= lightest_missed {
        return Err(NoLogisticFit::Falling {
            heaviest_recovered,
            lightest_missed,
        });
    }
    let x: Vec<f64> = masses.iter().map(|m| m.log10()).collect();
    let mut a = (k as f64 / (n - k) as f64).ln();
    let mut b = 0.0;
    let (mut ll, mut g, mut info) = logistic_terms(&x, recovered, a, b);
    let mut steps = 0;
    let mut converged = false;
    while steps < LOGISTIC_MAX_STEPS {
        steps += 1;
        let det = info[0] * info[2] - info[1] * info[1];
        if det.is_nan() || det <= 0.0 {
            break;
        }
        let mut da = (info[2] * g[0] - info[1] * g[1]) / det;
        let mut db = (info[0] * g[1] - info[1] * g[0]) / det;
        let mut next = logistic_terms(&x, recovered, a + da, b + db);
        let mut halvings = 0;
        while (next.0.is_nan() || next.0 < ll - 1e-9 * (1.0 + ll.abs())) && halvings < 50 {
            da *= 0.5;
            db *= 0.5;
            halvings += 1;
            next = logistic_terms(&x, recovered, a + da, b + db);
        }
        a += da;
        b += db;
        (ll, g, info) = next;
        if da.abs() <= 1e-12 * (1.0 + a.abs()) && db.abs() <= 1e-12 * (1.0 + b.abs()) {
            converged = true;
            break;
        }
    }
    let det = info[0] * info[2] - info[1] * info[1];
    if !converged || det.is_nan() || det <= 0.0 || !a.is_finite() || !b.is_finite() {
        return Err(NoLogisticFit::NoConvergence);
    }
    let (var_a, var_b, cov_ab) = (info[2] / det, info[0] / det, -info[1] / det);
    if b <= 0.0 {
        return Err(NoLogisticFit::NotRising {
            b,
            b_err: var_b.sqrt(),
        });
    }
    let at = |p: f64| {
        let xp = ((p / (1.0 - p)).ln() - a) / b;
        let var = (var_a + 2.0 * xp * cov_ab + xp * xp * var_b) / (b * b);
        (xp, var.sqrt())
    };
    let (log10_m50, log10_m50_err) = at(0.5);
    let (log10_m90, log10_m90_err) = at(0.9);
    let far = |x: f64| {
        !x.is_finite()
            || x < lo.log10() - LOGISTIC_MAX_DEX_OUTSIDE
            || x > hi.log10() + LOGISTIC_MAX_DEX_OUTSIDE
    };
    if far(log10_m50) || far(log10_m90) || !log10_m50_err.is_finite() || !log10_m90_err.is_finite()
    {
        return Err(NoLogisticFit::FarOutside {
            b,
            b_err: var_b.sqrt(),
            mass_range: (lo, hi),
        });
    }
    Ok(LogisticFit {
        a,
        b,
        a_err: var_a.sqrt(),
        b_err: var_b.sqrt(),
        cov_ab,
        log10_m50,
        log10_m50_err,
        log10_m90,
        log10_m90_err,
        mass_range: (lo, hi),
        n,
        recovered: k,
        steps,
    })
}

/// The median of finite values (mean of the middle two for an even count); NaN if none.
pub fn median(values: &[f64]) -> f64 {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// The result of scoring a run.
#[derive(Debug, Clone)]
pub struct Scoring {
    /// For each injected core, its matched leaf and the separation \[arcsec\].
    pub matches: Vec<Option<(usize, f64)>>,
    /// Completeness per bin.
    pub bins: Vec<Bin>,
    /// The 90% completeness limit \[M_sun\]: the lower edge of the limit's bin, or the least
    /// injected mass in it when that is higher (nothing lighter was tried there).
    pub limit_90: Option<f64>,
    /// Whether the limit's bin is the lowest occupied one, so the true limit lies at or below
    /// the least injected mass.
    pub limit_at_lowest: bool,
    /// How many of the counted cores have a true mass at or above the limit (0 without one):
    /// a limit resting on a few cores in sparse top bins is uncertain.
    pub n_above_limit: usize,
    /// The unbinned logistic fit of recovery against true mass over the same counted cores
    /// as the bins ([`logistic_fit`]), or why there is none.
    pub logistic: std::result::Result<LogisticFit, NoLogisticFit>,
    /// Median recovered `mass` / true mass of matched cores.
    pub median_mass_ratio: f64,
    /// Median recovered `mass_excess` / true mass of matched cores.
    pub median_excess_ratio: f64,
    /// Match radius \[arcsec\].
    pub radius_arcsec: f64,
    /// Width of the bins \[dex\].
    pub bin_dex: f64,
    /// For each injected core, the id of the baseline run's leaf whose peak lies nearest
    /// within the match radius of its true centre (a leaf of the map before injection), if a
    /// baseline was given and one does. Such cores are left out of the bins, the limit and
    /// the medians.
    pub on_own_leaf: Vec<Option<i64>>,
    /// Whether a baseline run was given.
    pub with_baseline: bool,
    /// How the baseline run's thresholds differ from the scored run's ([`check_baseline`]),
    /// for the report.
    pub baseline_differences: Vec<String>,
}

impl Scoring {
    /// The cores the completeness counts: all, or with a baseline those away from its leaves.
    pub fn counted(&self) -> impl Iterator<Item = usize> + '_ {
        (0..self.matches.len()).filter(|&i| self.on_own_leaf[i].is_none())
    }
}

/// Scores `run` against `truth` with bins of `bin_dex`.
pub fn score(truth: &Truth, run: &Run, bin_dex: f64) -> Scoring {
    score_with_baseline(truth, run, None, bin_dex)
}

/// Scores `run` against `truth` with bins of `bin_dex`, leaving out the cores that lie within
/// the match radius of a leaf of `baseline` (a run of the map before injection): a leaf found
/// there may be the map's own, so whether the core was recovered cannot be told.
pub fn score_with_baseline(
    truth: &Truth,
    run: &Run,
    baseline: Option<&Run>,
    bin_dex: f64,
) -> Scoring {
    let cores: Vec<(f64, f64)> = truth.cores.iter().map(|c| (c.lon, c.lat)).collect();
    let leaves: Vec<(f64, f64)> = run.leaves.iter().map(|l| (l.lon, l.lat)).collect();
    let radius = run.beam_fwhm_arcsec;
    let on_own_leaf: Vec<Option<i64>> = match baseline {
        None => vec![None; cores.len()],
        Some(b) => cores
            .iter()
            .map(|&(lon, lat)| {
                b.leaves
                    .iter()
                    .map(|l| (separation_arcsec(lon, lat, l.lon, l.lat), l.id))
                    .filter(|(d, _)| *d <= radius)
                    .min_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)))
                    .map(|(_, id)| id)
            })
            .collect(),
    };
    // The cores left out (on a leaf of the map's own) take no part in the matching either,
    // so that none of them takes a leaf from a counted core nearby.
    let counted: Vec<usize> = (0..cores.len())
        .filter(|&i| on_own_leaf[i].is_none())
        .collect();
    let counted_cores: Vec<(f64, f64)> = counted.iter().map(|&i| cores[i]).collect();
    let mut matches = vec![None; cores.len()];
    for (&i, m) in counted
        .iter()
        .zip(match_cores(&counted_cores, &leaves, radius))
    {
        matches[i] = m;
    }
    // The bins, limit and medians are those of this one pair pooled alone.
    let matched = Scoring {
        matches,
        bins: Vec::new(),
        limit_90: None,
        limit_at_lowest: false,
        n_above_limit: 0,
        logistic: Err(NoLogisticFit::TooFew { n: 0 }),
        median_mass_ratio: f64::NAN,
        median_excess_ratio: f64::NAN,
        radius_arcsec: radius,
        bin_dex,
        on_own_leaf,
        with_baseline: baseline.is_some(),
        baseline_differences: Vec::new(),
    };
    pool(&[(truth, run, &matched)], bin_dex)
}

/// Pools the scorings of several pairs of run and truth table (each matched within its own
/// pair, as [`score_with_baseline`] does): the bins, the 90% limit and the medians are those
/// of all the pairs' counted cores together, so the counts of a bin are the sums of the
/// pairs' counts. The pooled `matches` and `on_own_leaf` are the pairs' in turn (a match's
/// leaf index refers to its own pair's run); `radius_arcsec` is the first pair's.
pub fn pool(parts: &[Part], bin_dex: f64) -> Scoring {
    let mut masses = Vec::new();
    let mut found = Vec::new();
    let mut mass_ratios = Vec::new();
    let mut excess_ratios = Vec::new();
    for (truth, run, s) in parts {
        for i in s.counted() {
            let m = truth.cores[i].mass;
            masses.push(m);
            found.push(s.matches[i].is_some());
            if let Some((j, _)) = s.matches[i] {
                mass_ratios.push(run.leaves[j].mass / m);
                excess_ratios.push(run.leaves[j].mass_excess / m);
            }
        }
    }
    let bins = bins(&masses, &found, bin_dex);
    let (limit_90, limit_at_lowest) = limit_of(&bins, &masses, 0.9);
    let n_above_limit = limit_90.map_or(0, |l| masses.iter().filter(|&&m| m >= l).count());
    Scoring {
        n_above_limit,
        logistic: logistic_fit(&masses, &found),
        matches: parts
            .iter()
            .flat_map(|p| p.2.matches.iter().copied())
            .collect(),
        bins,
        limit_90,
        limit_at_lowest,
        median_mass_ratio: median(&mass_ratios),
        median_excess_ratio: median(&excess_ratios),
        radius_arcsec: parts.first().map_or(f64::NAN, |p| p.2.radius_arcsec),
        bin_dex,
        on_own_leaf: parts
            .iter()
            .flat_map(|p| p.2.on_own_leaf.iter().copied())
            .collect(),
        with_baseline: parts.iter().any(|p| p.2.with_baseline),
        baseline_differences: Vec::new(),
    }
}

/// Refuses to pool two truth tables of the same injected map (their cores would be counted
/// twice).
pub fn check_distinct(truths: &[&Truth]) -> Result<()> {
    for (k, a) in truths.iter().enumerate() {
        for b in &truths[..k] {
            if let (Some(x), Some(y)) = (&a.map_sha256, &b.map_sha256)
                && x == y
            {
                let same_file =
                    std::fs::canonicalize(&a.path).ok() == std::fs::canonicalize(&b.path).ok();
                return Err(Error::input(
                    &a.path,
                    if same_file {
                        "is given twice to --truth, so its cores would be counted twice; give each injection once.".to_string()
                    } else {
                        format!(
                            "belongs to the same injected map (SHA-256 {}...) as {}, so pooling both would count its cores twice; give each injection once.",
                            short(x),
                            b.path.display()
                        )
                    },
                ));
            }
        }
    }
    Ok(())
}

/// Whether two recorded auxiliary maps (`{"sha256": .., "values_sha256": ..}`) are the same:
/// by the values used when both records have them (so a re-saved copy of a map is the same
/// map), else by the files' SHA-256.
fn same_map(a: &serde_json::Value, b: &serde_json::Value) -> bool {
    let text =
        |v: &serde_json::Value, k: &str| v.get(k).and_then(|x| x.as_str()).map(str::to_string);
    match (text(a, "values_sha256"), text(b, "values_sha256")) {
        (Some(x), Some(y)) => x == y,
        _ => text(a, "sha256").is_some() && text(a, "sha256") == text(b, "sha256"),
    }
}

/// How the runs of pooled pairs differ from the first one in what decides which structures
/// are found and their masses: the thresholds and connectivity as given (`floor`,
/// `prominence`, `min_area`: the same words, such as a multiple of the noise, may give other
/// values on maps of other noise), the distance and the dust temperature. One sentence each;
/// pooling such runs mixes two extractions.
pub fn run_differences(runs: &[&Run]) -> Vec<String> {
    let Some(first) = runs.first() else {
        return Vec::new();
    };
    fn given(r: &Run, key: &str) -> String {
        let p = &r.parameters[key];
        match (p.get("given").and_then(|v| v.as_str()), p.get("value")) {
            (Some(g), _) => g.to_string(),
            (None, Some(v)) => v.to_string(),
            (None, None) if !p.is_null() => p.to_string(),
            _ => "not recorded".into(),
        }
    }
    fn distance(r: &Run) -> String {
        num(&r.physics, "/distance_pc")
            .map(|d| format!("{} pc", crate::units::tidy(d)))
            .unwrap_or_else(|| "none".into())
    }
    fn temperature(r: &Run) -> String {
        match (
            r.physics.get("temperature").and_then(|v| v.as_str()),
            r.other_inputs
                .pointer("/temperature_map/sha256")
                .and_then(|v| v.as_str()),
        ) {
            (_, Some(sha)) => format!("the temperature map of SHA-256 {}...", short(sha)),
            (Some(t), None) => t.to_string(),
            (None, None) => "none".into(),
        }
    }
    let mut out = Vec::new();
    for (k, r) in runs.iter().enumerate().skip(1) {
        let mut what = Vec::new();
        for key in ["floor", "prominence", "min_area", "connectivity"] {
            let (a, b) = (given(first, key), given(r, key));
            if a != b {
                what.push(format!("{key} {b} against {a}"));
            }
        }
        for (name, f) in [
            ("distance", distance as fn(&Run) -> String),
            ("temperature", temperature),
        ] {
            let (a, b) = (f(first), f(r));
            // Two temperature maps holding the same values are one assumption.
            let (ta, tb) = (
                &first.other_inputs["temperature_map"],
                &r.other_inputs["temperature_map"],
            );
            if name == "temperature" && ta.is_object() && tb.is_object() && same_map(ta, tb) {
                continue;
            }
            if a != b {
                what.push(format!("{name} {b} against {a}"));
            }
        }
        if !what.is_empty() {
            out.push(format!(
                "the run of set {} ({}) was not made as that of set 1 ({}): {}; pooling them mixes two extractions, so segment every injected map with the same options",
                k + 1,
                r.catalogue.display(),
                first.catalogue.display(),
                what.join("; ")
            ));
        }
    }
    out
}

/// The completeness plot: the recovered fraction in each occupied bin of true mass (at the
/// bin's geometric centre, spanning the bin, with its Wilson interval), the unbinned logistic
/// fit's curve when there is one, a guide at 90%, and the limits and counts as notes.
pub fn plot(s: &Scoring) -> crate::render::plot::Plot {
    use crate::render::plot::{AxisScale, Guide, Plot, Series};
    let occupied: Vec<&Bin> = s.bins.iter().filter(|b| b.injected > 0).collect();
    let (lo, hi) = (
        occupied.first().map(|b| b.lo).unwrap_or(0.1),
        occupied.last().map(|b| b.hi).unwrap_or(10.0),
    );
    let counted: Vec<usize> = s.counted().collect();
    let found = counted.iter().filter(|&&i| s.matches[i].is_some()).count();
    let mut series = vec![Series {
        label: String::new(),
        style: 0,
        points: occupied
            .iter()
            .map(|b| ((b.lo * b.hi).sqrt(), b.fraction))
            .collect(),
        y_errors: Some(occupied.iter().map(|b| (b.ci_lo, b.ci_hi)).collect()),
        x_errors: Some(occupied.iter().map(|b| (b.lo, b.hi)).collect()),
        ..Default::default()
    }];
    if let Ok(f) = &s.logistic {
        // The fitted curve across the bins shown, 200 points even in log mass.
        let (l0, l1) = (lo.log10(), hi.log10());
        let line = (0..=200)
            .map(|i| {
                let m = 10f64.powf(l0 + (l1 - l0) * i as f64 / 200.0);
                (m, f.probability(m))
            })
            .collect();
        series.push(Series {
            label: "logistic fit".into(),
            style: 1,
            line: Some(line),
            ..Default::default()
        });
    }
    let logistic_note = match &s.logistic {
        Ok(f) => format!(
            "logistic fit: 90% at {} M_{{sun}}{}",
            fmt_msun(f.m90()),
            match (f.m90_extrapolated(), f.weak()) {
                (true, true) => " (extrapolated; weak fit)",
                (true, false) => " (extrapolated)",
                (false, true) => " (weak fit)",
                (false, false) => "",
            }
        ),
        Err(_) => "no logistic fit (see report.md)".into(),
    };
    Plot {
        x_label: "true mass [M_{sun}]".into(),
        y_label: "recovered fraction".into(),
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Linear,
        y_range: Some((0.0, 1.05)),
        series,
        guides: vec![Guide {
            label: "90%".into(),
            points: vec![(lo, 0.9), (hi, 0.9)],
        }],
        notes: vec![
            if s.with_baseline {
                format!(
                    "{found} of {} injected cores away from the map's own leaves recovered",
                    counted.len()
                )
            } else {
                format!("{found} of {} injected cores recovered", s.matches.len())
            },
            match s.limit_90 {
                Some(m) if s.limit_at_lowest => {
                    format!("90% complete down to the least injected mass, {m:.3} M_{{sun}}")
                }
                Some(m) => format!(
                    "90% complete above {} M_{{sun}} ({} counted {} at or above it)",
                    fmt_binned_limit(m, s.bin_dex),
                    s.n_above_limit,
                    if s.n_above_limit == 1 {
                        "core"
                    } else {
                        "cores"
                    }
                ),
                None => "never 90% complete".into(),
            },
            logistic_note,
        ],
        ..Default::default()
    }
}

/// One scored pair: a truth table, the run of its injected map, and the run's scoring.
pub type Part<'a> = (&'a Truth, &'a Run, &'a Scoring);

/// matches.csv: one row per injected core.
pub fn matches_table(truth: &Truth, run: &Run, s: &Scoring) -> Table {
    matches_table_of(&[(truth, run, s)], false)
}

/// matches.csv of several pooled pairs: the rows of each pair in turn, led by a `set` column
/// (the pair's 1-based place on the command line).
pub fn pooled_matches_table(parts: &[Part]) -> Table {
    matches_table_of(parts, true)
}

/// A row of matches.csv: its set (from 1), its core, the matched leaf and separation
/// \[arcsec\] if any, the set's scoring and the core's index in its truth table.
type Row<'a> = (
    usize,
    &'a TrueCore,
    Option<(&'a Leaf, f64)>,
    &'a Scoring,
    usize,
);

fn matches_table_of(parts: &[Part], with_set: bool) -> Table {
    let mut t = Table {
        name: "matches".into(),
        ..Table::default()
    };
    let radius = parts[0].2.radius_arcsec;
    if parts.iter().all(|p| p.2.radius_arcsec == radius) {
        t.notes.push(format!(
            "each injected core matched one to one to the leaf whose peak lies nearest within one beam FWHM ({} arcsec), pairs taken by increasing separation",
            crate::units::tidy(radius)
        ));
    } else {
        t.notes.push(
            "each injected core matched one to one to the leaf of its own set's run whose peak lies nearest within one beam FWHM of that run, pairs taken by increasing separation".into(),
        );
    }
    t.notes.push(
        "mass_excess_ratio (above the merge level) is the fairer comparison: mass_ratio also counts the real map's background under the core".into(),
    );
    if with_set {
        t.notes.push(
            "set: the pair of run and truth table the core belongs to, numbered from 1 in the order given; cores are matched within their own set only".into(),
        );
    }
    let rows: Vec<Row> = parts
        .iter()
        .enumerate()
        .flat_map(|(k, (truth, run, s))| {
            truth.cores.iter().enumerate().map(move |(i, c)| {
                (
                    k + 1,
                    c,
                    s.matches[i].map(|(j, d)| (&run.leaves[j], d)),
                    *s,
                    i,
                )
            })
        })
        .collect();
    if with_set {
        t.push_i64(
            "set",
            "",
            "pair of run and truth table, 1-based in the order given",
            rows.iter().map(|r| r.0 as i64).collect(),
        );
    }
    t.push_i64(
        "id",
        "",
        "injected core id",
        rows.iter().map(|r| r.1.id).collect(),
    );
    t.push_f64(
        "true_mass",
        "solMass",
        "injected mass",
        rows.iter().map(|r| r.1.mass).collect(),
    );
    t.push_f64(
        "x",
        "pixel",
        "true centre, zero-based pixel column",
        rows.iter().map(|r| r.1.x).collect(),
    );
    t.push_f64(
        "y",
        "pixel",
        "true centre, zero-based pixel row",
        rows.iter().map(|r| r.1.y).collect(),
    );
    t.push_f64(
        "lon",
        "deg",
        "true centre, longitude in the map's frame",
        rows.iter().map(|r| r.1.lon).collect(),
    );
    t.push_f64(
        "lat",
        "deg",
        "true centre, latitude in the map's frame",
        rows.iter().map(|r| r.1.lat).collect(),
    );
    t.push_text(
        "leaf",
        "id of the matched leaf, empty if none",
        rows.iter()
            .map(|r| r.2.map(|(l, _)| l.id.to_string()).unwrap_or_default())
            .collect(),
    );
    t.push_f64(
        "offset",
        "arcsec",
        "separation between the true centre and the leaf's peak",
        rows.iter()
            .map(|r| r.2.map_or(f64::NAN, |(_, d)| d))
            .collect(),
    );
    t.push_f64(
        "offset_beams",
        "",
        "offset in beam FWHMs",
        rows.iter()
            .map(|r| r.2.map_or(f64::NAN, |(_, d)| d / r.3.radius_arcsec))
            .collect(),
    );
    t.push_f64(
        "mass_ratio",
        "",
        "the leaf's mass over the true mass",
        rows.iter()
            .map(|r| r.2.map_or(f64::NAN, |(l, _)| l.mass / r.1.mass))
            .collect(),
    );
    t.push_f64(
        "mass_excess_ratio",
        "",
        "the leaf's mass_excess over the true mass",
        rows.iter()
            .map(|r| r.2.map_or(f64::NAN, |(l, _)| l.mass_excess / r.1.mass))
            .collect(),
    );
    if parts.iter().any(|p| p.2.with_baseline) {
        t.notes.push(
            "own_leaf: a leaf of the baseline run (the map before injection) peaks within one beam FWHM of the true centre; such cores are left out of completeness.csv and the report's limit".into(),
        );
        t.push_text(
            "own_leaf",
            "id of the baseline run's leaf within one beam FWHM, empty if none",
            rows.iter()
                .map(|r| {
                    r.3.on_own_leaf[r.4]
                        .map(|id| id.to_string())
                        .unwrap_or_default()
                })
                .collect(),
        );
    }
    t
}

/// completeness.csv: one row per bin of true mass.
pub fn completeness_table(s: &Scoring) -> Table {
    let mut t = Table {
        name: "completeness".into(),
        ..Table::default()
    };
    t.notes.push(format!(
        "bins of {} dex in true mass; interval: Wilson (1927) score interval at 68.27% (z = 1)",
        crate::units::tidy(s.bin_dex)
    ));
    if s.with_baseline {
        let left = s.on_own_leaf.iter().filter(|o| o.is_some()).count();
        t.notes.push(format!(
            "{left} of the {} injected cores, within one beam FWHM of a leaf of the baseline run (the map before injection), are left out of these counts",
            s.on_own_leaf.len()
        ));
    }
    logistic_params(&mut t, s);
    let b = &s.bins;
    t.push_f64(
        "mass_lo",
        "solMass",
        "lower edge of the bin",
        b.iter().map(|b| b.lo).collect(),
    );
    t.push_f64(
        "mass_hi",
        "solMass",
        "upper edge of the bin",
        b.iter().map(|b| b.hi).collect(),
    );
    t.push_i64(
        "injected",
        "",
        "injected cores",
        b.iter().map(|b| b.injected as i64).collect(),
    );
    t.push_i64(
        "recovered",
        "",
        "matched to a leaf",
        b.iter().map(|b| b.recovered as i64).collect(),
    );
    t.push_f64(
        "fraction",
        "",
        "recovered / injected",
        b.iter().map(|b| b.fraction).collect(),
    );
    t.push_f64(
        "fraction_lo",
        "",
        "Wilson 68.27% interval, low",
        b.iter().map(|b| b.ci_lo).collect(),
    );
    t.push_f64(
        "fraction_hi",
        "",
        "Wilson 68.27% interval, high",
        b.iter().map(|b| b.ci_hi).collect(),
    );
    t
}

/// completeness.csv's parameters of the unbinned logistic fit ([`logistic_fit`]): the same
/// names whether there is a fit or not (numbers empty and `logistic_no_fit` the reason when
/// there is none).
fn logistic_params(t: &mut Table, s: &Scoring) {
    use crate::table::{Param, ParamValue::*};
    let f = s.logistic.as_ref().ok();
    let num = |g: fn(&LogisticFit) -> f64| Float(f.map_or(f64::NAN, g));
    t.notes.push("logistic_*: unbinned maximum-likelihood fit of recovery (0 or 1 per counted core) against x = log10(true mass / Msun), P = 1 / (1 + exp(-(a + b x))); errors 1 sigma from the inverse Fisher information, by the delta method for the masses; it does not depend on the bins".into());
    t.meta.extend([
        Param::new("logistic_a", num(|f| f.a), "", "intercept a"),
        Param::new(
            "logistic_a_err",
            num(|f| f.a_err),
            "",
            "standard error of a",
        ),
        Param::new("logistic_b", num(|f| f.b), "", "slope b per dex of mass"),
        Param::new(
            "logistic_b_err",
            num(|f| f.b_err),
            "",
            "standard error of b",
        ),
        Param::new(
            "logistic_cov_ab",
            num(|f| f.cov_ab),
            "",
            "covariance of a and b",
        ),
        Param::new(
            "logistic_m90",
            num(LogisticFit::m90),
            "solMass",
            "mass at 90% recovery",
        ),
        Param::new(
            "logistic_log10_m90_err",
            num(|f| f.log10_m90_err),
            "",
            "standard error of log10 of the 90% mass, in dex",
        ),
        Param::new(
            "logistic_m90_extrapolated",
            Text(f.map_or(String::new(), |f| f.m90_extrapolated().to_string())),
            "",
            "whether the 90% mass lies outside the injected masses",
        ),
        Param::new(
            "logistic_m50",
            num(LogisticFit::m50),
            "solMass",
            "mass at 50% recovery",
        ),
        Param::new(
            "logistic_log10_m50_err",
            num(|f| f.log10_m50_err),
            "",
            "standard error of log10 of the 50% mass, in dex",
        ),
        Param::new(
            "logistic_m50_extrapolated",
            Text(f.map_or(String::new(), |f| f.m50_extrapolated().to_string())),
            "",
            "whether the 50% mass lies outside the injected masses",
        ),
        Param::new(
            "logistic_weak",
            Text(f.map_or(String::new(), |f| f.weak().to_string())),
            "",
            "whether the slope b is less than twice its error (a weak fit)",
        ),
        Param::new(
            "logistic_no_fit",
            Text(
                s.logistic
                    .as_ref()
                    .err()
                    .map_or(String::new(), |e| e.to_string()),
            ),
            "",
            "why there is no fit (empty when there is one)",
        ),
    ]);
}

/// The report's completeness section (Markdown).
pub fn report(truth: &Truth, run: &Run, s: &Scoring) -> String {
    let mut r = String::new();
    let n = truth.cores.len();
    let k = s.matches.iter().filter(|m| m.is_some()).count();
    let counted: Vec<usize> = s.counted().collect();
    let _ = writeln!(r, "# Completeness\n");
    let _ = writeln!(
        r,
        "Run `{}` scored against `{}` ({n} injected cores into {}).\n",
        run.catalogue.display(),
        truth.path.display(),
        truth.map_name.as_deref().unwrap_or("the map")
    );
    let _ = writeln!(
        r,
        "Each injected core is matched, one to one, to the leaf whose peak lies nearest its true centre within one beam FWHM ({} arcsec, the geometric mean of the beam's axes); peaks rather than centroids, since a leaf's centroid is pulled by the background and by where its footprint is cut. {k} of {n} cores were recovered ({:.1}%).\n",
        crate::units::tidy(s.radius_arcsec),
        100.0 * k as f64 / n as f64
    );
    if s.with_baseline {
        let kc = counted.iter().filter(|&&i| s.matches[i].is_some()).count();
        let _ = writeln!(
            r,
            "{}",
            left_out_sentence(
                "With the baseline run (the map before injection): ",
                "of one of its leaves",
                n,
                counted.len(),
                kc
            )
        );
        for d in &s.baseline_differences {
            let _ = writeln!(r, "**Warning**: {d}.\n");
        }
    }
    bins_section(&mut r, s);
    let suspect = suspect_matches(truth, run, s);
    suspect_section(&mut r, suspect, s.with_baseline);
    assumptions_section(&mut r, None, &assumption_differences(truth, run));
    let _ = writeln!(r, "{CAVEATS}");
    r
}

/// The report of several pooled pairs (Markdown): each pair (its run, truth table, cores
/// counted and recovered), the ways their runs differ (`run_differences`), then the pooled
/// bins, limit and medians of `pooled` ([`pool`]) and each pair's warnings.
pub fn pooled_report(parts: &[Part], pooled: &Scoring, run_differences: &[String]) -> String {
    let mut r = String::new();
    let n: usize = parts.iter().map(|p| p.0.cores.len()).sum();
    let counted: Vec<usize> = pooled.counted().collect();
    let k = counted
        .iter()
        .filter(|&&i| pooled.matches[i].is_some())
        .count();
    let _ = writeln!(r, "# Completeness\n");
    let _ = writeln!(
        r,
        "Pooled over {} injections: each run is scored against the truth table of its own injected map, each injected core matched, one to one, to the leaf of that run whose peak lies nearest its true centre within one beam FWHM (the geometric mean of the beam's axes; peaks rather than centroids, since a leaf's centroid is pulled by the background and by where its footprint is cut). The bins, the 90% limit and the medians below are those of all the sets' cores together.\n",
        parts.len()
    );
    let _ = writeln!(
        r,
        "| set | run | truth table | injected | counted | recovered |\n| --- | --- | --- | --- | --- | --- |"
    );
    for (i, (truth, run, s)) in parts.iter().enumerate() {
        let c: Vec<usize> = s.counted().collect();
        let _ = writeln!(
            r,
            "| {} | `{}` | `{}` | {} | {} | {} |",
            i + 1,
            run.catalogue.display(),
            truth.path.display(),
            truth.cores.len(),
            c.len(),
            c.iter().filter(|&&i| s.matches[i].is_some()).count()
        );
    }
    let _ = writeln!(r);
    if pooled.with_baseline {
        let _ = writeln!(
            r,
            "{}",
            left_out_sentence(
                "Pooled: ",
                "of a leaf of the baseline run (the map before injection)",
                n,
                counted.len(),
                k
            )
        );
    } else {
        let _ = writeln!(
            r,
            "Pooled: {k} of {n} cores were recovered ({:.1}%).\n",
            100.0 * k as f64 / n as f64
        );
    }
    for d in run_differences {
        let _ = writeln!(r, "**Warning**: {d}.\n");
    }
    for (i, (_, _, s)) in parts.iter().enumerate() {
        for d in &s.baseline_differences {
            let _ = writeln!(r, "**Warning** (set {}): {d}.\n", i + 1);
        }
    }
    bins_section(&mut r, pooled);
    let suspect: usize = parts
        .iter()
        .map(|(truth, run, s)| suspect_matches(truth, run, s))
        .sum();
    suspect_section(&mut r, suspect, pooled.with_baseline);
    for (i, (truth, run, _)) in parts.iter().enumerate() {
        assumptions_section(&mut r, Some(i + 1), &assumption_differences(truth, run));
    }
    let _ = writeln!(r, "{CAVEATS}");
    r
}

/// The report's sentence on the cores a baseline run leaves out: `lead`, how many of the `n`
/// injected cores lie within one beam FWHM `near` a baseline leaf, and how many of the
/// `counted` others were `recovered`.
fn left_out_sentence(lead: &str, near: &str, n: usize, counted: usize, recovered: usize) -> String {
    format!(
        "{lead}{} of the {n} {} within one beam FWHM {near}, where a leaf found may be the map's own, and are left out of what follows (`own_leaf` in `matches.csv`); {recovered} of the other {counted} were recovered ({:.1}%).\n",
        n - counted,
        if n - counted == 1 {
            "core lies"
        } else {
            "cores lie"
        },
        if counted == 0 {
            f64::NAN
        } else {
            100.0 * recovered as f64 / counted as f64
        }
    )
}

/// The report's closing caveats.
const CAVEATS: &str = "Caveats: the result depends on where the cores were placed; cores injected on a bright background are harder to find; Gaussian and Bonnor-Ebert cores are idealisations; masses carry factor-of-two systematics from dust opacity, temperature and distance: when the run uses the injection's assumptions they cancel in the ratios of recovered to true masses, but the mass limit is only as right as those assumptions are for the real cloud.";

/// The report's list of the ways a run's physical assumptions differ from its injection's,
/// under a bold `lead`.
fn assumptions_section(r: &mut String, set: Option<usize>, differences: &[String]) {
    if !differences.is_empty() {
        let unchecked = differences.len() == 1 && differences[0].starts_with(UNCHECKED);
        let lead = format!(
            "{}he run's physical assumptions {} the injection's.",
            set.map(|i| format!("Set {i}: t"))
                .unwrap_or_else(|| "T".into()),
            if unchecked {
                "could not be checked against"
            } else {
                "differ from"
            }
        );
        let _ = writeln!(
            r,
            "**{lead}** The recovery of the cores does not depend on them, but the recovered masses and their ratios to the true masses do; segment the injected map with the assumptions of the injection (its NAME-spec.json) for a fair mass comparison:\n"
        );
        for d in differences {
            let _ = writeln!(r, "* {d}.");
        }
        let _ = writeln!(r);
    }
}

/// The counted matches whose leaf holds far more mass above its surroundings than the core
/// injected: more likely leaves of the map's own that happen to peak within a beam of the
/// core.
fn suspect_matches(truth: &Truth, run: &Run, s: &Scoring) -> usize {
    s.counted()
        .filter(|&i| {
            s.matches[i].is_some_and(|(j, _)| {
                run.leaves[j].mass_excess > SUSPECT_RATIO * truth.cores[i].mass
            })
        })
        .count()
}

/// The report's paragraph on the suspect matches ([`suspect_matches`]), if any.
fn suspect_section(r: &mut String, suspect: usize, with_baseline: bool) {
    if suspect > 0 {
        let _ = writeln!(
            r,
            "**{suspect} of the matches** {} a leaf whose `mass_excess` is more than {SUSPECT_RATIO} times the injected mass: probably leaves of the map's own that peak within a beam of the injected core, counted as recoveries (see `matches.csv`); they raise the completeness of the faintest cores. {}\n",
            if suspect == 1 { "has" } else { "have" },
            if with_baseline {
                "The baseline run found no leaf there, so they may be leaves that only the injected core's mass lifted above the thresholds."
            } else {
                "Give --baseline with a run of the map before injection to leave out the cores that fall on the map's own leaves."
            }
        );
    }
}

/// The report's table of bins, its 90% limit and the median mass ratios.
fn bins_section(r: &mut String, s: &Scoring) {
    let _ = writeln!(
        r,
        "| true mass (Msun) | injected | recovered | fraction | 68.3% interval |\n| --- | --- | --- | --- | --- |"
    );
    for b in &s.bins {
        let _ = writeln!(
            r,
            "| {:.3} - {:.3} | {} | {} | {} | {} |",
            b.lo,
            b.hi,
            b.injected,
            b.recovered,
            if b.injected > 0 {
                format!("{:.3}", b.fraction)
            } else {
                "-".into()
            },
            if b.injected > 0 {
                format!("{:.3} - {:.3}", b.ci_lo, b.ci_hi)
            } else {
                "-".into()
            }
        );
    }
    let _ = writeln!(
        r,
        "\nBins are {} dex wide in true mass; intervals are Wilson (1927) score intervals at 68.3% (z = 1).\n",
        crate::units::tidy(s.bin_dex)
    );
    match s.limit_90 {
        Some(m) if s.limit_at_lowest => {
            let _ = writeln!(
                r,
                "**90% complete down to the least injected mass, {m:.3} Msun**: every bin with injected cores recovers at least 90% of them, so the limit lies at or below that mass; inject lighter cores to find it.\n"
            );
        }
        Some(m) => {
            let _ = writeln!(
                r,
                "**90% completeness limit: {m:.3} Msun** ({} of the cores counted at or above it). Found by walking the bins down from the most massive: this is the lower edge of the lowest bin from which every bin above it that holds injected cores recovers at least 90% of them (or the least mass injected in that bin, if higher). Bins holding few cores make it uncertain (see their intervals) and move it with the bin width; inject more cores for a firmer limit, such as more massive ones or a flatter mass function (`--core-mass-index 1`, flat in log mass).\n",
                s.n_above_limit
            );
        }
        None => {
            let _ = writeln!(
                r,
                "**No 90% completeness limit**: the most massive bin with injected cores already recovers less than 90% of them.\n"
            );
        }
    }
    logistic_paragraph(r, s);
    let _ = writeln!(
        r,
        "Median recovered / true mass of the matched cores: {} with `mass_excess`, {} with `mass`. Injected cores sit on the real map's background, which `mass` counts as well; `mass_excess` (above the level where the leaf meets its surroundings) is the fairer comparison, though it also cuts the core's own wings below that level.\n",
        fmt_ratio(s.median_excess_ratio),
        fmt_ratio(s.median_mass_ratio)
    );
}

/// The report's paragraph on the unbinned logistic fit ([`logistic_fit`]), beside the
/// binned limit.
fn logistic_paragraph(r: &mut String, s: &Scoring) {
    let lead = "**Unbinned 90% completeness (logistic fit)**";
    match &s.logistic {
        Ok(f) => {
            let range = |x: f64, e: f64| {
                format!(
                    "log10 M = {x:.3} +- {e:.3}; 1 sigma: {} - {} Msun",
                    fmt_msun(10f64.powf(x - e)),
                    fmt_msun(10f64.powf(x + e))
                )
            };
            let _ = writeln!(
                r,
                "{lead}: **{} Msun** ({}); 50% at {} Msun ({}). Fitted by maximum likelihood to the {} counted cores one by one ({} recovered), P(recovered) = 1 / (1 + exp(-(a + b log10 M))), a = {:.3} +- {:.3}, b = {:.3} +- {:.3}: it does not depend on the bins. Errors are 1 sigma, from the inverse Fisher information (by the delta method for the masses); the logistic shape is assumed, recovery rising with mass.\n",
                fmt_msun(f.m90()),
                range(f.log10_m90, f.log10_m90_err),
                fmt_msun(f.m50()),
                range(f.log10_m50, f.log10_m50_err),
                f.n,
                f.recovered,
                f.a,
                f.a_err,
                f.b,
                f.b_err
            );
            if f.weak() {
                let _ = writeln!(
                    r,
                    "**The fit is weak: its slope b is less than twice its error**, as recovery hardly changes with mass among these cores (few missed, or missed at every mass); its curve and masses are poorly constrained. Inject more cores, and fainter ones, around the limit for a firmer value.\n"
                );
            }
            let which = match (f.m90_extrapolated(), f.m50_extrapolated()) {
                (true, true) => Some("The 90% and the 50% masses are extrapolations: they lie"),
                (true, false) => Some("The 90% mass is an extrapolation: it lies"),
                (false, true) => Some("The 50% mass is an extrapolation: it lies"),
                (false, false) => None,
            };
            if let Some(which) = which {
                let _ = writeln!(
                    r,
                    "**{which} outside the injected masses** ({} - {} Msun), where the fitted curve is not tested; inject cores reaching past them for a firmer value.\n",
                    fmt_msun(f.mass_range.0),
                    fmt_msun(f.mass_range.1)
                );
            }
        }
        Err(why) => {
            let _ = writeln!(r, "{lead}: no fit, as {why}.\n");
        }
    }
}

/// A match whose leaf's `mass_excess` exceeds this many times the injected mass is named in
/// the report as a probable leaf of the map's own (cairn's convention).
pub const SUSPECT_RATIO: f64 = 10.0;

fn fmt_ratio(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.3}")
    } else {
        "n/a (no core recovered)".into()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A specification given where the truth table is asked for is named as such, with the
    /// truth table written beside it; a CSV without the columns is told which are needed.
    #[test]
    fn a_spec_given_as_the_truth_table_points_to_the_table() {
        let d = tempfile::tempdir().unwrap();
        let spec = d.path().join("cloud-spec.json");
        std::fs::write(&spec, "{\n  \"nx\": 64\n}\n").unwrap();
        let e = read_truth(&spec).unwrap_err().to_string();
        assert!(
            e.contains("is a JSON file (a NAME-spec.json, say), not a truth table; give the NAME-truth.csv that cairn synth wrote (cloud-truth.csv beside it)."),
            "{e}"
        );
        let csv = d.path().join("other.csv");
        std::fs::write(&csv, "a,b\n1,2\n").unwrap();
        let e = read_truth(&csv).unwrap_err().to_string();
        assert!(e.contains("lacks one of the columns id, x, y"), "{e}");
    }

    /// The figure's binned limit has the digits its bins justify: a bin of w dex is a factor
    /// 10^w, so the limit's last digit should be finer than that step and no finer than needed:
    /// two significant digits for 0.2-dex bins (a factor of 1.58), three for 0.01-dex bins (a
    /// factor of 1.023, where two digits would round by up to 5% near 1.0).
    #[test]
    fn the_binned_limit_is_shown_to_the_digits_of_its_bins() {
        assert_eq!(fmt_binned_limit(6.068, 0.2), "6.1");
        assert_eq!(fmt_binned_limit(10f64.powf(0.8), 0.2), "6.3");
        assert_eq!(fmt_binned_limit(0.3631, 0.2), "0.36");
        assert_eq!(fmt_binned_limit(25.12, 0.1), "25");
        assert_eq!(fmt_binned_limit(1.023, 0.01), "1.02");
        assert_eq!(fmt_binned_limit(6.068, 0.05), "6.1");
        assert_eq!(fmt_binned_limit(6.068, 0.005), "6.07");
        for w in [0.01, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0] {
            for k in -10..10 {
                // A bin edge, shown: its rounding stays within half the bin's step.
                let m = 10f64.powf(k as f64 * w);
                let shown: f64 = fmt_binned_limit(m, w).parse().unwrap();
                assert!(
                    (shown / m - 1.0).abs() < 0.5 * (10f64.powf(w) - 1.0),
                    "{m} in {w}-dex bins shown as {shown}"
                );
            }
        }
    }

    /// A limit is never below the masses tried: with every bin above 90%, the limit is the
    /// least injected mass (2 Msun), not the lower edge of its bin (10^0.2 = 1.585), and it is
    /// said to lie at or below it; when a lower bin fails, the limit is the next bin's least
    /// mass if that lies above its edge.
    #[test]
    fn the_limit_is_never_below_the_masses_tried() {
        let masses = [2.0, 2.2, 3.0, 4.0, 5.0];
        let b = bins(&masses, &[true; 5], 0.2);
        assert!((b[0].lo - 10f64.powf(0.2)).abs() < 1e-12);
        assert_eq!(limit_of(&b, &masses, 0.9), (Some(2.0), true));
        let masses = [1.0, 1.1, 2.0, 2.2, 3.0];
        let found = [false, false, true, true, true];
        let b = bins(&masses, &found, 0.2);
        assert_eq!(limit_of(&b, &masses, 0.9), (Some(2.0), false));
        assert!(limit_of(&b, &masses, 0.9).0.unwrap() > b[1].lo);
    }

    /// The plot shows each occupied bin's fraction at its geometric centre, spanning the bin,
    /// with its Wilson interval (the completeness table's numbers), and the 90% guide.
    #[test]
    fn the_plot_carries_the_bins_of_the_table() {
        let masses = [0.12, 0.13, 0.5, 0.55, 0.6, 2.0, 2.2, 9.0];
        let found = [false, true, true, false, true, true, true, true];
        let b = bins(&masses, &found, 0.5);
        let s = Scoring {
            matches: found.iter().map(|&f| f.then_some((0usize, 1.0))).collect(),
            limit_90: completeness_limit(&b, 0.9),
            limit_at_lowest: false,
            n_above_limit: 0,
            bins: b.clone(),
            logistic: logistic_fit(&masses, &found),
            median_mass_ratio: f64::NAN,
            median_excess_ratio: f64::NAN,
            radius_arcsec: 10.0,
            bin_dex: 0.5,
            on_own_leaf: vec![None; masses.len()],
            with_baseline: false,
            baseline_differences: Vec::new(),
        };
        let p = plot(&s);
        let occupied: Vec<&Bin> = b.iter().filter(|x| x.injected > 0).collect();
        let series = &p.series[0];
        assert_eq!(series.points.len(), occupied.len());
        for (k, bin) in occupied.iter().enumerate() {
            let (x, y) = series.points[k];
            assert!((x - (bin.lo * bin.hi).sqrt()).abs() < 1e-12 * x);
            assert_eq!(y, bin.fraction);
            assert_eq!(series.y_errors.as_ref().unwrap()[k], (bin.ci_lo, bin.ci_hi));
            assert_eq!(series.x_errors.as_ref().unwrap()[k], (bin.lo, bin.hi));
        }
        assert!(p.guides[0].points.iter().all(|&(_, y)| y == 0.9));
        assert!(p.notes[0].starts_with("6 of 8 injected cores recovered"));
        // The binned limit, with the count it rests on (none counted here, as set above).
        assert_eq!(
            p.notes[1],
            format!(
                "90% complete above {} M_{{sun}} (0 counted cores at or above it)",
                fmt_binned_limit(s.limit_90.unwrap(), 0.5)
            )
        );
        // The logistic fit's curve spans the bins shown and is the fit's own probability.
        let f = s.logistic.as_ref().unwrap();
        let curve = p.series[1].line.as_ref().unwrap();
        assert_eq!(p.series[1].label, "logistic fit");
        assert!((curve[0].0 - occupied[0].lo).abs() < 1e-12);
        assert!((curve[curve.len() - 1].0 - occupied[occupied.len() - 1].hi).abs() < 1e-9);
        assert!(curve.iter().all(|&(m, y)| y == f.probability(m)));
        assert!((f.probability(f.m90()) - 0.9).abs() < 1e-12);
        assert!((f.probability(f.m50()) - 0.5).abs() < 1e-12);
        // Eight cores, two missed: a weak fit (slope under twice its error), said so.
        assert!(f.weak(), "{f:?}");
        assert_eq!(
            p.notes[2],
            format!("logistic fit: 90% at {:.3} M_{{sun}} (weak fit)", f.m90())
        );
    }

    /// The logistic fit is the maximum of the likelihood: its score (the gradient) vanishes
    /// there, sum(y - p) = 0 and sum((y - p) x) = 0; and it does not depend on the unit of
    /// mass but through a: masses ten times heavier move both limits up by exactly 1 dex.
    #[test]
    fn the_logistic_fit_solves_the_likelihood_equations() {
        let masses = [0.1, 0.15, 0.2, 0.3, 0.4, 0.5, 0.7, 1.0, 1.5, 2.0, 3.0, 5.0];
        let found = [
            false, false, true, false, false, true, false, true, true, true, false, true,
        ];
        let f = logistic_fit(&masses, &found).unwrap();
        let (mut g0, mut g1) = (0.0, 0.0);
        for (&m, &y) in masses.iter().zip(&found) {
            let r = f64::from(u8::from(y)) - f.probability(m);
            g0 += r;
            g1 += r * m.log10();
        }
        assert!(g0.abs() < 1e-12 && g1.abs() < 1e-12, "{g0} {g1}");
        assert!(f.b > 0.0 && f.steps < 20, "{f:?}");
        assert_eq!((f.n, f.recovered), (12, 6));
        let heavier: Vec<f64> = masses.iter().map(|m| 10.0 * m).collect();
        let g = logistic_fit(&heavier, &found).unwrap();
        assert!((g.log10_m90 - f.log10_m90 - 1.0).abs() < 1e-9);
        assert!((g.log10_m50 - f.log10_m50 - 1.0).abs() < 1e-9);
        assert!((g.b - f.b).abs() < 1e-9 * f.b && (g.b_err - f.b_err).abs() < 1e-9 * f.b_err);
        assert!((g.log10_m90_err - f.log10_m90_err).abs() < 1e-9);
    }

    /// Without a maximum-likelihood fit to give, the reason is said instead of numbers.
    #[test]
    fn no_logistic_fit_says_why() {
        let m6 = [0.1, 0.2, 0.3, 1.0, 2.0, 3.0];
        assert_eq!(
            logistic_fit(&m6[..4], &[false, true, false, true]),
            Err(NoLogisticFit::TooFew { n: 4 })
        );
        assert_eq!(
            logistic_fit(&m6, &[true; 6]),
            Err(NoLogisticFit::AllRecovered { n: 6 })
        );
        assert_eq!(
            logistic_fit(&m6, &[false; 6]),
            Err(NoLogisticFit::NoneRecovered { n: 6 })
        );
        assert_eq!(
            logistic_fit(&[1.0; 6], &[false, true, false, true, true, true]),
            Err(NoLogisticFit::OneMass { mass: 1.0 })
        );
        let separated = logistic_fit(&m6, &[false, false, false, true, true, true]);
        assert_eq!(
            separated,
            Err(NoLogisticFit::Separated {
                heaviest_missed: 0.3,
                lightest_recovered: 1.0
            })
        );
        assert!(
            separated.unwrap_err().to_string().contains(
                "separated in mass: the limit lies between 0.300 and 1.000 Msun (the heaviest missed and the lightest recovered core)"
            )
        );
        // Quasi-separation: one mass holds both a missed and a recovered core.
        let quasi = logistic_fit(
            &[0.1, 0.2, 1.0, 1.0, 2.0, 3.0],
            &[false, false, false, true, true, true],
        );
        assert_eq!(
            quasi,
            Err(NoLogisticFit::Separated {
                heaviest_missed: 1.0,
                lightest_recovered: 1.0
            })
        );
        assert!(
            quasi
                .unwrap_err()
                .to_string()
                .contains("the limit lies at 1.000 Msun")
        );
        assert_eq!(
            logistic_fit(&m6, &[true, true, true, false, false, false]),
            Err(NoLogisticFit::Falling {
                heaviest_recovered: 0.3,
                lightest_missed: 1.0
            })
        );
        // Ties: the heaviest recovered and the lightest missed core weigh the same.
        let tied = logistic_fit(
            &[0.1, 0.2, 1.0, 1.0, 2.0, 3.0],
            &[true, true, true, false, false, false],
        );
        let why = tied.unwrap_err().to_string();
        assert!(
            why.contains("(1.000 Msun at most) is no heavier than every missed one"),
            "{why}"
        );
        // One core of thirty missed, in the middle of the masses: the slope is near zero and
        // the 90% mass hundreds of dex away, so no limit is given, but the reason.
        let masses: Vec<f64> = (0..30)
            .map(|i| {
                if i == 15 {
                    10f64.powf(-0.005)
                } else {
                    0.1 * 100f64.powf(i as f64 / 29.0)
                }
            })
            .collect();
        let found: Vec<bool> = (0..30).map(|i| i != 15).collect();
        match logistic_fit(&masses, &found) {
            Err(e @ NoLogisticFit::FarOutside { .. }) => {
                let why = e.to_string();
                assert!(
                    why.contains("more than 2 dex outside the injected masses"),
                    "{why}"
                );
            }
            other => panic!("{other:?}"),
        }
        assert_eq!(fmt_msun(0.451), "0.451");
        assert_eq!(fmt_msun(2.5e-7), "2.500e-7");
        assert_eq!(fmt_msun(f64::INFINITY), "inf");
        // Overlapping, but recovered more often among the lighter cores.
        match logistic_fit(&m6, &[true, true, false, true, false, false]) {
            Err(NoLogisticFit::NotRising { b, b_err }) => {
                assert!(b < 0.0 && b_err > 0.0, "{b} {b_err}");
                let why = NoLogisticFit::NotRising { b, b_err }.to_string();
                assert!(why.starts_with("recovery does not rise with mass"), "{why}");
            }
            other => panic!("{other:?}"),
        }
    }

    /// Pooled pairs are fitted together: the pooled fit is that of all their counted cores.
    #[test]
    fn the_pooled_logistic_fit_is_that_of_all_the_sets_cores() {
        let (m1, f1) = ([0.1, 0.3, 0.5, 1.0, 2.0], [false, true, false, true, true]);
        let (m2, f2) = ([0.2, 0.4, 0.8, 1.5, 3.0], [false, false, true, false, true]);
        let (t1, r1, s1) = scored_pair(&m1, &f1);
        let (t2, r2, s2) = scored_pair(&m2, &f2);
        let p = pool(&[(&t1, &r1, &s1), (&t2, &r2, &s2)], 0.5);
        let all: Vec<f64> = m1.iter().chain(&m2).copied().collect();
        let found: Vec<bool> = f1.iter().chain(&f2).copied().collect();
        assert_eq!(p.logistic, logistic_fit(&all, &found));
        assert_eq!(p.logistic.as_ref().unwrap().n, 10);
        let csv = completeness_table(&p).to_csv();
        let f = p.logistic.as_ref().unwrap();
        assert!(
            csv.contains(&format!(
                "# parameter logistic_m90 = {}",
                crate::table::fmt_f64(f.m90())
            )),
            "{csv}"
        );
        assert!(csv.contains("# parameter logistic_no_fit =  "), "{csv}");
    }

    fn bin(lo: f64, injected: usize, recovered: usize) -> Bin {
        Bin {
            lo,
            hi: lo * 10f64.powf(0.2),
            injected,
            recovered,
            fraction: if injected > 0 {
                recovered as f64 / injected as f64
            } else {
                f64::NAN
            },
            ci_lo: 0.0,
            ci_hi: 1.0,
        }
    }

    /// A truth of cores of `masses`, a run with one leaf per core (mass_excess twice the
    /// core's, mass three times) and a scoring in which the cores `found` are matched.
    fn scored_pair(masses: &[f64], found: &[bool]) -> (Truth, Run, Scoring) {
        let core = |i: usize, m: f64| TrueCore {
            id: i as i64 + 1,
            x: 0.0,
            y: 0.0,
            lon: 0.0,
            lat: 0.0,
            mass: m,
        };
        let truth = Truth {
            path: PathBuf::from("t-truth.csv"),
            cores: masses
                .iter()
                .enumerate()
                .map(|(i, &m)| core(i, m))
                .collect(),
            map_sha256: None,
            map_name: None,
            spec: Err("none".into()),
        };
        let run = Run {
            catalogue: PathBuf::from("run/structures.csv"),
            leaves: masses
                .iter()
                .enumerate()
                .map(|(i, &m)| Leaf {
                    id: i as i64 + 1,
                    lon: 0.0,
                    lat: 0.0,
                    mass: 3.0 * m,
                    mass_excess: 2.0 * m,
                })
                .collect(),
            input_sha256: String::new(),
            beam_fwhm_arcsec: 18.0,
            physics: serde_json::Value::Null,
            unit_kind: String::new(),
            other_inputs: serde_json::Value::Null,
            parameters: serde_json::Value::Null,
            unit: None,
            beam: serde_json::Value::Null,
            input: serde_json::Value::Null,
        };
        let matches: Vec<_> = found
            .iter()
            .enumerate()
            .map(|(i, &f)| f.then_some((i, 1.0)))
            .collect();
        let b = bins(masses, found, 0.5);
        let (limit_90, limit_at_lowest) = limit_of(&b, masses, 0.9);
        let s = Scoring {
            matches,
            limit_90,
            limit_at_lowest,
            n_above_limit: limit_90.map_or(0, |l| masses.iter().filter(|&&m| m >= l).count()),
            bins: b,
            logistic: logistic_fit(masses, found),
            median_mass_ratio: 3.0,
            median_excess_ratio: 2.0,
            radius_arcsec: 18.0,
            bin_dex: 0.5,
            on_own_leaf: vec![None; masses.len()],
            with_baseline: false,
            baseline_differences: Vec::new(),
        };
        (truth, run, s)
    }

    /// Pooling by hand: set 1 holds 10 cores of 2 Msun (all found) and 10 of 0.5 Msun (8
    /// found), so alone it is 90% complete only down to 2 Msun (the least mass of its bin
    /// [1, 3.16)); set 2 holds 10 cores of 0.5 Msun, all found. Pooled, the bin [0.316, 1)
    /// has 18 of 20 = 0.9, so the limit drops to 0.5 Msun, the least mass tried. Its Wilson
    /// (1927) interval at z = 1 (the module doc's formula) is
    /// (18.5 -+ sqrt(20) sqrt(0.09 + 1/80)) / 21 = (0.81277, 0.94913). The median ratios stay
    /// 2 and 3 (every leaf holds twice and three times its core's mass).
    #[test]
    fn pooled_bins_add_the_sets_counts_and_set_the_limit_over_them() {
        let mut m1 = vec![2.0; 10];
        m1.extend([0.5; 10]);
        let mut f1 = vec![true; 10];
        f1.extend([true, true, true, true, true, true, true, true, false, false]);
        let (t1, r1, s1) = scored_pair(&m1, &f1);
        assert_eq!((s1.limit_90, s1.n_above_limit), (Some(2.0), 10));
        let (t2, r2, s2) = scored_pair(&[0.5; 10], &[true; 10]);
        let p = pool(&[(&t1, &r1, &s1), (&t2, &r2, &s2)], 0.5);
        let counts: Vec<(usize, usize)> =
            p.bins.iter().map(|b| (b.injected, b.recovered)).collect();
        assert_eq!(counts, vec![(20, 18), (10, 10)]);
        assert!((p.bins[0].lo - 10f64.powf(-0.5)).abs() < 1e-12);
        assert!(
            (p.bins[0].ci_lo - 0.81277).abs() < 1e-5,
            "{}",
            p.bins[0].ci_lo
        );
        assert!(
            (p.bins[0].ci_hi - 0.94913).abs() < 1e-5,
            "{}",
            p.bins[0].ci_hi
        );
        assert_eq!((p.limit_90, p.limit_at_lowest), (Some(0.5), true));
        assert_eq!(p.n_above_limit, 30, "every core is at or above the limit");
        assert_eq!((p.median_excess_ratio, p.median_mass_ratio), (2.0, 3.0));
        assert_eq!(p.matches.len(), 30);
        let table = pooled_matches_table(&[(&t1, &r1, &s1), (&t2, &r2, &s2)]).to_csv();
        let rows: Vec<&str> = table.lines().filter(|l| !l.starts_with('#')).collect();
        assert!(rows[0].starts_with("set,id,true_mass,"), "{}", rows[0]);
        assert_eq!(rows.len(), 31);
        assert!(rows[20].starts_with("1,20,0.5,") && rows[21].starts_with("2,1,0.5,"));
    }

    /// Runs are compared as their thresholds were given and by distance and temperature.
    #[test]
    fn runs_made_otherwise_are_named() {
        let (_, mut a, _) = scored_pair(&[1.0], &[true]);
        a.parameters = serde_json::json!({
            "floor": {"given": "default", "value": 1.0},
            "min_area": {"given": "default", "value": 11},
            "connectivity": 8
        });
        a.physics = serde_json::json!({"distance_pc": 250.0, "temperature": "12 K"});
        let mut b = a.clone();
        b.parameters["floor"]["value"] = serde_json::json!(1.1);
        assert!(
            run_differences(&[&a, &b]).is_empty(),
            "the same words given"
        );
        b.parameters["min_area"]["given"] = serde_json::json!("20px");
        b.physics["distance_pc"] = serde_json::json!(300.0);
        let d = run_differences(&[&a, &b]);
        assert_eq!(d.len(), 1);
        assert!(
            d[0].contains("min_area 20px against default")
                && d[0].contains("distance 300 pc against 250 pc")
                && !d[0].contains("temperature"),
            "{}",
            d[0]
        );
    }

    #[test]
    fn the_limit_is_the_lowest_bin_from_which_all_above_stay_at_90_percent() {
        // 50%, 95%, 80%, 100%, empty, 90%: from the top, 90% and 100% pass, 80% stops.
        let b = vec![
            bin(0.1, 10, 5),
            bin(0.2, 20, 19),
            bin(0.4, 10, 8),
            bin(0.8, 10, 10),
            bin(1.6, 0, 0),
            bin(3.2, 10, 9),
        ];
        assert_eq!(completeness_limit(&b, 0.9), Some(0.8));
        assert_eq!(completeness_limit(&b[..1], 0.9), None);
    }

    #[test]
    fn bins_are_anchored_at_one_solar_mass() {
        let b = bins(&[1.0, 1.5, 0.99, 10.0], &[true, false, true, true], 0.5);
        // log10: 0, 0.176, -0.0044, 1 -> bins -1, 0, 0, 2 (and an empty bin 1).
        assert_eq!(b.len(), 4);
        assert_eq!(
            (b[0].injected, b[1].injected, b[2].injected, b[3].injected),
            (1, 2, 0, 1)
        );
        assert_eq!(b[1].recovered, 1);
        assert!((b[1].lo - 1.0).abs() < 1e-15 && (b[3].lo - 10.0).abs() < 1e-12);
    }

    #[test]
    fn a_leaf_is_matched_at_most_once_and_ties_go_to_the_lower_core() {
        // Two cores equally far (36 arcsec) on either side of one leaf, and a second leaf
        // near the second core only.
        let d = 0.01;
        let cores = [(10.0 - d, 0.0), (10.0 + d, 0.0)];
        let leaves = [(10.0, 0.0), (10.0 + d + 0.001, 0.0)];
        let m = match_cores(&cores, &leaves, 40.0);
        assert_eq!(m[1].map(|x| x.0), Some(1));
        assert_eq!(m[0].map(|x| x.0), Some(0));
        let m = match_cores(&cores, &leaves[..1], 40.0);
        assert_eq!(m[0].map(|x| x.0), Some(0));
        assert!(m[1].is_none());
    }
}
