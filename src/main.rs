//! The `cairn` command: argument parsing and printing only; the science is in the library.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};

use cairn::error::{Error, Result};
use cairn::inspect::{self, NoiseChoice};
use cairn::map::{self, Beam, HduChoice, LoadOptions};
use cairn::units::{self, Dimension, ExtinctionBand};

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
    Inspect(InspectArgs),
}

/// Options that say how to read a map; shared by every command that reads one.
#[derive(Args, Clone)]
struct MapArgs {
    /// HDU to read: a zero-based index (0 = primary) or an EXTNAME [default: the first image with data].
    #[arg(long, value_name = "N|NAME")]
    hdu: Option<String>,
    /// For a cube: the zero-based plane to take along its one long extra axis.
    #[arg(long, value_name = "K")]
    plane: Option<usize>,
    /// Unit of the pixels, instead of BUNIT: cm-2, m-2, mag, MJy/sr, Jy/sr, Jy/beam, mJy/beam, Jy/pixel.
    #[arg(long, value_name = "UNIT")]
    unit: Option<String>,
    /// Band of an extinction map in magnitudes: V (A_V) or K (A_K).
    #[arg(long, value_name = "V|K", default_value = "V")]
    extinction_band: String,
    /// Beam FWHM instead of BMAJ/BMIN/BPA: `18.2arcsec`, or `major,minor,angle` such as `20arcsec,15arcsec,30deg`.
    #[arg(long, value_name = "FWHM")]
    beam: Option<String>,
    /// Wavelength or frequency of the map instead of the header's, such as `850um` or `353GHz`.
    #[arg(long, value_name = "LENGTH|FREQ")]
    wavelength: Option<String>,
    /// Noise in map units (a number, or a quantity such as `0.02MJy/sr`), instead of the estimate.
    #[arg(long, value_name = "VALUE", conflicts_with = "noise_map")]
    noise: Option<String>,
    /// A FITS map of the noise on the same grid, instead of the estimate.
    #[arg(long, value_name = "FILE")]
    noise_map: Option<PathBuf>,
}

#[derive(Args)]
struct InspectArgs {
    /// The FITS map.
    map: PathBuf,
    #[command(flatten)]
    read: MapArgs,
    /// Print JSON (keys documented in the README) instead of text.
    #[arg(long)]
    json: bool,
}

impl MapArgs {
    fn load_options(&self, require_unit: bool) -> Result<LoadOptions> {
        let band = match self.extinction_band.trim().to_ascii_uppercase().as_str() {
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
        if let Some(w) = wavelength
            && w.si <= 0.0
        {
            return Err(Error::usage("--wavelength must be positive."));
        }
        Ok(LoadOptions {
            hdu: self
                .hdu
                .as_deref()
                .map(HduChoice::parse)
                .unwrap_or(HduChoice::Auto),
            plane: self.plane,
            unit: self.unit.clone(),
            band,
            beam,
            wavelength,
            require_unit,
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
    let opts = args.read.load_options(true)?;
    let m = map::load(&args.map, &opts)?;
    let choice = args.read.noise_choice(&m)?;
    let summary = inspect::summarise(&m, &choice)?;
    if args.json {
        let text =
            serde_json::to_string_pretty(&summary).map_err(|e| Error::internal(e.to_string()))?;
        println!("{text}");
    } else {
        print!("{}", inspect::render_text(&summary));
    }
    Ok(())
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let _quiet = cli.quiet;
    let result = match &cli.command {
        Command::Inspect(a) => run_inspect(a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("cairn: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
