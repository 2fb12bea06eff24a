//! Material constants from creep test data (`lifeledger fit`).
//!
//! Engineers hold creep tests of their own heats; the monitor needs model
//! constants in its material format. This module turns a test CSV into
//! those constants, with the statistics needed to judge them:
//!
//! * [`input`]: the CSV format (units in the header names) and its
//!   conversion to K, MPa, hours and 1/h, with line-numbered errors.
//! * [`larson_miller`]: the Larson-Miller master curve
//!   `log10 t_r = P(log10 σ)/T − C`, C fitted or given, order 1–3 given or
//!   chosen by BIC/AIC, minimum curve = mean − k·SEE.
//! * [`norton`]: the Norton-Arrhenius law `ln ε̇ = ln A + n ln σ − Q/(RT)`.
//! * `lsq`: the linear least-squares solver both fits share.
//! * `report`, `svg`: terminal and JSON reports, the TOML block in the
//!   material format, and SVG plots of data and curves.
//! * [`units`]: the input file's units, shown beside SI in reports and plots.
//!
//! The fitting functions are pure ([`fit_larson_miller`], [`fit_norton`]);
//! [`run`] is the thin shell that reads files, prints and writes.
//!
//! These are screening fits. Whether a fitted curve may be used for a
//! plant component is the decision of a responsible engineer under the
//! plant's governing code.

mod error;
pub mod input;
pub mod larson_miller;
mod lsq;
pub mod norton;
mod report;
mod svg;
pub mod units;

pub use error::FitError;
pub use input::{parse_rate_tests, parse_rupture_tests, RateTest, RuptureTest, TestFile};
pub use larson_miller::{fit_larson_miller, Criterion, LmFit, LmOptions, LmResidual, OrderChoice, OrderScore};
pub use norton::{fit_norton, NortonFit, NortonOptions, NortonResidual};
pub use report::{
    larson_miller_text, larson_miller_toml, norton_text, norton_toml, GradeInfo, LarsonMillerBlock, NortonBlock,
};
pub use svg::{larson_miller_svg, norton_svg};

use anyhow::Context as _;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Output format of the terminal report.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum Format {
    /// Human-readable report followed by the TOML block.
    #[default]
    Text,
    /// One JSON document with the fit, its statistics and the TOML block.
    Json,
}

const INPUT_HELP: &str = "Columns are named by quantity and unit: temperature_c | temperature_k | \
temperature_f, stress_mpa | stress_ksi | stress_psi, and optional heat, specimen. Lines starting \
with '#' are comments; other columns are ignored.";

/// Which units reports and plots show beside K and MPa.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum ShowUnits {
    /// The input file's units (°F, ksi, psi), when they are not SI.
    #[default]
    Input,
    /// °F and ksi, whatever the input.
    Us,
    /// K, °C and MPa only.
    Si,
}

impl ShowUnits {
    fn pick(self, file: units::InputUnits) -> units::InputUnits {
        match self {
            ShowUnits::Input => file,
            ShowUnits::Us => units::InputUnits { temperature: "degF", stress: "ksi" },
            ShowUnits::Si => units::InputUnits::default(),
        }
    }
}

/// Fit material constants to creep test data (screening fits).
#[derive(Debug, Clone, PartialEq, clap::Subcommand)]
pub enum FitCommand {
    /// Fit a Larson-Miller master curve to creep-rupture tests.
    #[command(long_about = "Fit a Larson-Miller master curve to creep-rupture tests.\n\n\
        Model: log10 t_r = P(x)/T − C with P(x) = a0 + a1·x + … (order 1–3), x = log10(σ/MPa), \
        T in K, t_r in h (Larson & Miller, Trans. ASME 74, 1952). The fit minimises the residual \
        sum of squares in log10 rupture time; with C free the problem is linear in (a0…ak, C) and \
        is solved exactly, no scan over C is needed. The minimum curve is the mean less k standard \
        errors of estimate in log10 time.\n\n\
        Input: CSV with a header line, columns temperature_c|temperature_k|temperature_f, \
        stress_mpa|stress_ksi|stress_psi, rupture_h, optional heat and specimen.\n\n\
        Output: a report (text or JSON) and a TOML block in lifeledger's material format \
        ([larson_miller], or a whole grade file with --melting-point-k).\n\n\
        This is a screening fit: acceptance of material data for a plant component is for a \
        responsible engineer under the governing code.")]
    LarsonMiller(LarsonMillerArgs),
    /// Fit a Norton-Arrhenius creep law to minimum-creep-rate tests.
    #[command(long_about = "Fit a Norton-Arrhenius creep law to minimum-creep-rate tests.\n\n\
        Model: ε̇ = A·σ^n·exp(−Q/(R·T)), ε̇ in 1/h, σ in MPa, T in K, Q in J/mol, \
        R = 8.314462618 J/(mol·K) (CODATA 2018), fitted by linear least squares in ln ε̇ \
        (exactly, with no scatter estimate, when there are three tests).\n\n\
        Input: CSV with a header line, columns temperature_c|temperature_k|temperature_f, \
        stress_mpa|stress_ksi|stress_psi, rate_per_h|rate_per_s|rate_percent_per_h, optional \
        heat and specimen. The tests must span at least two temperatures and two stresses.\n\n\
        Output: a report (text or JSON) and a [norton] TOML block in lifeledger's material format.\n\n\
        This is a screening fit: acceptance of material data for a plant component is for a \
        responsible engineer under the governing code.")]
    Norton(NortonArgs),
}

/// Arguments of `lifeledger fit larson-miller`.
#[derive(Debug, Clone, PartialEq, clap::Args)]
pub struct LarsonMillerArgs {
    /// Creep-rupture test CSV (temperature_*, stress_*, rupture_h[, heat, specimen]).
    #[arg(long, value_name = "FILE", long_help = format!("Creep-rupture test CSV. {INPUT_HELP} Rupture time in hours: rupture_h."))]
    pub input: PathBuf,

    /// Hold the Larson-Miller constant C at this value instead of fitting it (20 is the classic choice).
    #[arg(long, value_name = "C")]
    pub constant: Option<f64>,

    /// Order of the master-curve polynomial in log10 σ, 1–3 [default: chosen by --criterion].
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u8).range(1..=3))]
    pub order: Option<u8>,

    /// Information criterion that chooses the order when --order is not given.
    #[arg(long, value_enum, default_value_t = Criterion::Bic)]
    pub criterion: Criterion,

    /// Minimum curve = mean − k·SEE in log10 time (1.645: one-sided 95 % of a normal scatter band).
    #[arg(long, value_name = "K", default_value_t = 1.645)]
    pub k: f64,

    /// Flag tests whose |standardized residual| exceeds this.
    #[arg(long, value_name = "Z", default_value_t = 2.5)]
    pub outlier_threshold: f64,

    /// Grade name for a complete grade file [default: the input file's stem].
    #[arg(long, value_name = "NAME", requires = "melting_point")]
    pub grade: Option<String>,

    /// Melting (solidus) point in K; with it the TOML block is a complete grade file.
    #[arg(long, value_name = "K", group = "melting_point")]
    pub melting_point_k: Option<f64>,

    /// Melting (solidus) point in °C; alternative to --melting-point-k.
    #[arg(long, value_name = "C", group = "melting_point", conflicts_with = "melting_point_k")]
    pub melting_point_c: Option<f64>,

    /// Report format on standard output.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,

    /// Write the TOML block (material format) to this file.
    #[arg(long, value_name = "FILE")]
    pub output: Option<PathBuf>,

    /// Write an SVG plot of stress against the Larson-Miller parameter to this file.
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
    /// Units shown beside K and MPa in the report and the plot.
    #[arg(long, value_enum, default_value_t = ShowUnits::Input)]
    pub show_units: ShowUnits,
}

/// Arguments of `lifeledger fit norton`.
#[derive(Debug, Clone, PartialEq, clap::Args)]
pub struct NortonArgs {
    /// Minimum-creep-rate test CSV (temperature_*, stress_*, rate_per_h or rate_per_s[, heat, specimen]).
    #[arg(long, value_name = "FILE", long_help = format!("Minimum-creep-rate test CSV. {INPUT_HELP} Rate: rate_per_h, rate_per_s or rate_percent_per_h."))]
    pub input: PathBuf,

    /// Flag tests whose |standardized residual| exceeds this.
    #[arg(long, value_name = "Z", default_value_t = 2.5)]
    pub outlier_threshold: f64,

    /// Report format on standard output.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,

    /// Write the [norton] TOML block to this file.
    #[arg(long, value_name = "FILE")]
    pub output: Option<PathBuf>,

    /// Write an SVG plot of creep rate against stress (log-log) to this file.
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
    /// Units shown beside K and MPa in the report and the plot.
    #[arg(long, value_enum, default_value_t = ShowUnits::Input)]
    pub show_units: ShowUnits,
}

/// Run a `lifeledger fit` command, printing the report to standard output.
pub fn run(cmd: &FitCommand) -> anyhow::Result<()> {
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    run_to(cmd, &mut out)
}

/// Run a `lifeledger fit` command, writing the report to `out` (files named
/// by `--output` and `--plot` are written as well).
pub fn run_to(cmd: &FitCommand, out: &mut dyn Write) -> anyhow::Result<()> {
    match cmd {
        FitCommand::LarsonMiller(args) => run_larson_miller(args, out),
        FitCommand::Norton(args) => run_norton(args, out),
    }
}

fn read_input(path: &Path) -> anyhow::Result<(String, String, String)> {
    let text = std::fs::read_to_string(path).with_context(|| format!("cannot read test file {}", path.display()))?;
    let shown = path.display().to_string();
    let name = path.file_name().map_or_else(|| shown.clone(), |n| n.to_string_lossy().into_owned());
    Ok((text, shown, name))
}

fn write_file(path: &Path, text: &str, what: &str) -> anyhow::Result<()> {
    std::fs::write(path, text).with_context(|| format!("cannot write {what} to {}", path.display()))
}

#[derive(serde::Serialize)]
struct JsonReport<'a, F: serde::Serialize> {
    command: &'a str,
    input: &'a str,
    caution: &'a str,
    notes: &'a [String],
    /// The units of the input file's columns (results are in SI).
    input_units: units::InputUnits,
    fit: &'a F,
    toml: &'a str,
}

/// What a fit hands back: the report, the TOML block and the plot, written
/// to the files asked for and shown in the chosen format.
struct Report<'a, F: serde::Serialize> {
    command: &'static str,
    shown: &'a str,
    notes: &'a [String],
    units: units::InputUnits,
    fit: &'a F,
    /// The terminal report.
    text: String,
    /// The TOML block, already checked to load back unchanged.
    block: &'a str,
    /// What the block is called in messages ("material block", ...).
    block_name: &'static str,
}

impl<F: serde::Serialize> Report<'_, F> {
    fn emit(
        &self,
        format: Format,
        output: Option<&Path>,
        plot: Option<&Path>,
        svg: impl FnOnce() -> String,
        out: &mut dyn Write,
    ) -> anyhow::Result<()> {
        if let Some(path) = output {
            write_file(path, self.block, &format!("the {}", self.block_name))?;
        }
        if let Some(path) = plot {
            write_file(path, &svg(), "the plot")?;
        }
        match format {
            Format::Text => {
                write!(out, "{}", self.text)?;
                writeln!(out)?;
                if let Some(path) = plot {
                    writeln!(out, "Plot written to {}", path.display())?;
                }
                let mut name = self.block_name.to_string();
                if let Some(first) = name.get_mut(0..1) {
                    first.make_ascii_uppercase();
                }
                match output {
                    Some(path) => writeln!(out, "{name} written to {}", path.display())?,
                    None => write!(out, "{name} (TOML):\n\n{}", self.block)?,
                }
            }
            Format::Json => {
                let report = JsonReport {
                    command: self.command,
                    input: self.shown,
                    caution: crate::CAUTION,
                    notes: self.notes,
                    input_units: self.units,
                    fit: self.fit,
                    toml: self.block,
                };
                serde_json::to_writer_pretty(&mut *out, &report)?;
                writeln!(out)?;
            }
        }
        Ok(())
    }
}

fn run_larson_miller(args: &LarsonMillerArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let (text, shown, name) = read_input(&args.input)?;
    let file = parse_rupture_tests(&text, &shown)?;
    let opts = LmOptions {
        constant: args.constant,
        order: args.order.map(usize::from),
        criterion: args.criterion,
        k: args.k,
        outlier_threshold: args.outlier_threshold,
    };
    let fit = fit_larson_miller(&file.tests, &opts).with_context(|| format!("fitting {shown}"))?;
    let melting = match (args.melting_point_k, args.melting_point_c) {
        (Some(k), _) => Some((k, format!("{k} K, given to lifeledger fit (--melting-point-k)"))),
        (None, Some(c)) => Some((c + 273.15, format!("{c} °C, given to lifeledger fit (--melting-point-c)"))),
        (None, None) => None,
    };
    let grade = match melting {
        Some((k, source)) => {
            if !k.is_finite() || k <= 0.0 {
                anyhow::bail!("the melting point must be a positive temperature (got {k} K)");
            }
            let stem = args.input.file_stem().map_or_else(|| "fitted".into(), |s| s.to_string_lossy().into_owned());
            Some(GradeInfo {
                grade: args.grade.clone().unwrap_or(stem),
                melting_point_k: k,
                melting_point_source: source,
            })
        }
        None => None,
    };
    let block = larson_miller_toml(&fit, &name, grade.as_ref()).context("serializing the material block")?;
    // The block must load back as the material format it claims to be.
    let loaded = if grade.is_some() {
        toml::from_str::<crate::physics::material::Material>(&block).map(|m| m.larson_miller)
    } else {
        toml::from_str::<LarsonMillerBlock>(&block).map(|b| b.larson_miller)
    };
    let loaded = loaded.context("internal error: the written TOML block does not load back")?;
    anyhow::ensure!(loaded == fit.curve(&name), "internal error: the TOML block does not load back unchanged");

    let report = Report {
        command: "fit larson-miller",
        shown: &shown,
        notes: &file.notes,
        units: file.units,
        fit: &fit,
        text: larson_miller_text(&fit, &shown, &file.notes, args.show_units.pick(file.units)),
        block: &block,
        block_name: "material block",
    };
    report.emit(
        args.format,
        args.output.as_deref(),
        args.plot.as_deref(),
        || larson_miller_svg(&fit, &name, args.show_units.pick(file.units)),
        out,
    )
}

fn run_norton(args: &NortonArgs, out: &mut dyn Write) -> anyhow::Result<()> {
    let (text, shown, name) = read_input(&args.input)?;
    let file = parse_rate_tests(&text, &shown)?;
    let opts = NortonOptions { outlier_threshold: args.outlier_threshold };
    let fit = fit_norton(&file.tests, &opts).with_context(|| format!("fitting {shown}"))?;
    let block = norton_toml(&fit, &name).context("serializing the [norton] block")?;
    let loaded: NortonBlock =
        toml::from_str(&block).context("internal error: the [norton] block does not load back")?;
    anyhow::ensure!(loaded.norton == fit.law(&name), "internal error: the [norton] block does not load back unchanged");
    let report = Report {
        command: "fit norton",
        shown: &shown,
        notes: &file.notes,
        units: file.units,
        fit: &fit,
        text: norton_text(&fit, &shown, &file.notes, args.show_units.pick(file.units)),
        block: &block,
        block_name: "[norton] block",
    };
    report.emit(
        args.format,
        args.output.as_deref(),
        args.plot.as_deref(),
        || norton_svg(&fit, &name, args.show_units.pick(file.units)),
        out,
    )
}
