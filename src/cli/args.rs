//! Command-line arguments.

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;
use taumap::pipeline::{CapacitanceMode, InductanceMode};

/// taumap: distribution of relaxation times from impedance spectra.
#[derive(Parser, Debug)]
#[command(name = "taumap", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Invert an impedance spectrum (CSV) onto a distribution of relaxation times.
    Invert(InvertArgs),
    /// Invert a step transient (CSV) onto a distribution of time constants.
    Transient(TransientArgs),
    /// Invert a series of spectra (over cycling, state of charge,
    /// temperature) on one grid, follow each process's peak across the
    /// series and fit its trend.
    Track(TrackArgs),
    /// Test an impedance spectrum (CSV) for Kramers-Kronig validity
    /// (linear, causal, stable while measured).
    Kk(KkArgs),
    /// Write the impedance spectrum (or the step response) of an
    /// equivalent-circuit model file as CSV, ready for invert (or
    /// transient).
    Simulate(SimulateArgs),
    /// Propose equivalent circuits from the DRT peaks of a spectrum, fit
    /// each by complex non-linear least squares and rank them by BIC.
    Model(ModelArgs),
    /// Write the demo scenario into demo-data/ and invert it.
    Demo(DemoArgs),
}

/// Basis family on the command line.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum BasisArg {
    /// Gaussian radial basis functions.
    Gaussian,
    /// Piecewise-linear hat functions.
    Hat,
}

/// Inductance mode on the command line.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum InductanceArg {
    /// Kept when the data need it (likelihood-ratio test).
    Auto,
    /// Always fitted.
    On,
    /// Never fitted.
    Off,
}

/// Penalty kind on the command line.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum PenaltyArg {
    /// One lambda for the whole distribution.
    Global,
    /// A weight per grid point (uniform penalty).
    Adaptive,
}

/// A switch on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum OnOff {
    /// On.
    On,
    /// Off.
    Off,
}

/// Series capacitance mode on the command line.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum CapacitanceArg {
    /// Kept when the data need it.
    Auto,
    /// Always fitted.
    On,
    /// Never fitted.
    Off,
}

/// Weighting on the command line.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum WeightingArg {
    /// Divide each point by |Z| (relative errors).
    Modulus,
    /// Equal weights.
    Unit,
}

/// Options shared by every inversion command.
#[derive(Args, Debug, Clone)]
pub struct SolveArgs {
    /// Regularisation: a rule (gcv, lcurve, discrepancy, recv) or a positive number.
    #[arg(
        long,
        value_name = "RULE|VALUE",
        default_value = "discrepancy",
        allow_negative_numbers = true
    )]
    pub lambda: String,
    /// Penalty: adaptive (a uniform penalty with a weight per grid point,
    /// refined from the global solution that --lambda chooses; see README)
    /// or global (one lambda alone, by --lambda).
    #[arg(long, value_enum, default_value = "adaptive")]
    pub penalty: PenaltyArg,
    /// Derivative order of the penalty: 0, 1 or 2.
    #[arg(long, value_name = "K", default_value_t = 0)]
    pub penalty_order: usize,
    /// Uncertainty bands on gamma and on every peak, peak confidence and
    /// the count of processes the data support (posterior sampling; see
    /// README). They need the adaptive penalty. [default: on; off for
    /// track, where they would cost about ten times the inversion of a
    /// series]
    #[arg(long, value_enum)]
    pub bands: Option<OnOff>,
    /// Seed of the posterior draws (the same seed gives the same bands
    /// for any number of threads).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Smallest time constant of the grid (s); default one decade below the
    /// fastest the data resolve (1/(2 pi f_max), or the first sample after a step).
    #[arg(long, value_name = "S", allow_negative_numbers = true)]
    pub tau_min: Option<f64>,
    /// Largest time constant of the grid (s); default one decade above the
    /// slowest the data resolve (1/(2 pi f_min), or the record length).
    #[arg(long, value_name = "S", allow_negative_numbers = true)]
    pub tau_max: Option<f64>,
    /// Grid points per decade of tau [default: 10 for spectra, 20 for transients].
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub per_decade: Option<f64>,
    /// Basis functions.
    #[arg(long, value_enum, default_value = "gaussian")]
    pub basis: BasisArg,
    /// Skip the re-im cross-validation curve when another rule decides
    /// (saves two lambda sweeps; lambda.csv then has no recv_score column).
    #[arg(long)]
    pub no_cv_curve: bool,
    /// Print summary.json to standard output.
    #[arg(long)]
    pub json: bool,
    /// Skip the SVG and PNG plots.
    #[arg(long)]
    pub no_plots: bool,
}

/// How the input's columns are found, when their headings do not say.
#[derive(Args, Debug, Clone, Default)]
pub struct ColumnArgs {
    /// Which column holds a quantity: ROLE=HEADING or ROLE=#N (counted from
    /// 1); repeatable. Roles: frequency, real, imag, neg-imag, modulus,
    /// phase, neg-phase (spectra); time, voltage, current (transients).
    #[arg(long = "column", value_name = "ROLE=HEADING")]
    pub column: Vec<String>,
    /// The unit of a role's column, overriding its heading: ROLE=UNIT, e.g.
    /// frequency=kHz, real=mOhm, time=min; repeatable.
    #[arg(long = "unit", value_name = "ROLE=UNIT")]
    pub unit: Vec<String>,
}

impl ColumnArgs {
    /// The choices as the readers take them.
    pub fn map(&self) -> taumap::Result<taumap::io::columns::ColumnMap> {
        let mut map = taumap::io::columns::ColumnMap::default();
        for c in &self.column {
            map.add_column(c)?;
        }
        for u in &self.unit {
            map.add_unit(u)?;
        }
        Ok(map)
    }
}

/// The series terms of a spectrum's model, for `invert` and `kk`.
#[derive(Args, Debug, Clone)]
pub struct SeriesTermArgs {
    /// Series inductance.
    #[arg(long, value_enum, default_value = "auto")]
    pub inductance: InductanceArg,
    /// Series capacitance (blocking electrodes): auto keeps it when the
    /// fit needs it (a capacitive low-frequency branch); the flag alone
    /// means on, as it always has; a mode is given with `=`
    /// (`--series-capacitance=off`).
    #[arg(
        long,
        value_enum,
        default_value = "auto",
        num_args = 0..=1,
        require_equals = true,
        default_missing_value = "on",
        value_name = "auto|on|off"
    )]
    pub series_capacitance: CapacitanceArg,
}

impl SeriesTermArgs {
    /// The modes as the library takes them.
    pub fn modes(&self) -> (InductanceMode, CapacitanceMode) {
        (
            match self.inductance {
                InductanceArg::Auto => InductanceMode::Auto,
                InductanceArg::On => InductanceMode::On,
                InductanceArg::Off => InductanceMode::Off,
            },
            match self.series_capacitance {
                CapacitanceArg::Auto => CapacitanceMode::Auto,
                CapacitanceArg::On => CapacitanceMode::On,
                CapacitanceArg::Off => CapacitanceMode::Off,
            },
        )
    }
}

/// The band of frequencies a spectrum command uses.
#[derive(Args, Debug, Clone, Default)]
pub struct FrequencyBandArgs {
    /// Use only the points at or above this frequency (Hz).
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub f_min: Option<f64>,
    /// Use only the points at or below this frequency (Hz).
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub f_max: Option<f64>,
}

/// `taumap invert`.
#[derive(Args, Debug)]
pub struct InvertArgs {
    /// Input spectrum: frequency_hz,z_re_ohm,z_im_ohm (see README for accepted
    /// variants); `-` reads standard input (then --out is needed).
    #[arg(value_name = "IN.csv")]
    pub input: PathBuf,
    /// Output directory (created if missing); default <stem>-taumap/ beside the input.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Series terms of the model.
    #[command(flatten)]
    pub series: SeriesTermArgs,
    /// Residual weighting.
    #[arg(long, value_enum, default_value = "modulus")]
    pub weighting: WeightingArg,
    /// The band of frequencies used.
    #[command(flatten)]
    pub band: FrequencyBandArgs,
    /// Column choices.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// Shared solver options.
    #[command(flatten)]
    pub solve: SolveArgs,
}

/// `taumap kk`.
#[derive(Args, Debug)]
pub struct KkArgs {
    /// Input spectrum, as for `invert`; `-` reads standard input (then
    /// --out is needed).
    #[arg(value_name = "IN.csv")]
    pub input: PathBuf,
    /// Output directory (created if missing); default <stem>-kk/ beside the input.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Relative noise level of the measurement (0.001 = 0.1 % of |Z| on each
    /// of the real and imaginary parts); default: estimated from the
    /// residuals.
    #[arg(long, value_name = "X", allow_negative_numbers = true)]
    pub noise_rel: Option<f64>,
    /// Series terms of the test's model.
    #[command(flatten)]
    pub series: SeriesTermArgs,
    /// The band of frequencies used.
    #[command(flatten)]
    pub band: FrequencyBandArgs,
    /// Column choices.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// Print summary.json to standard output.
    #[arg(long)]
    pub json: bool,
    /// Skip the SVG and PNG plots.
    #[arg(long)]
    pub no_plots: bool,
}

/// `taumap transient`.
#[derive(Args, Debug)]
#[command(group(
    clap::ArgGroup::new("step")
        .required(true)
        .args(["current_step_a", "relaxation_current_a", "voltage_step_v"]),
))]
pub struct TransientArgs {
    /// Input transient: time_s,voltage_v (current step, relaxation) or
    /// time_s,current_a (voltage step); see README for accepted variants;
    /// `-` reads standard input (then --out is needed).
    #[arg(value_name = "IN.csv")]
    pub input: PathBuf,
    /// Output directory (created if missing); default <stem>-taumap/ beside the input.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// A current step of I amperes at t = 0; the file holds the voltage.
    #[arg(long, value_name = "I", allow_negative_numbers = true)]
    pub current_step_a: Option<f64>,
    /// A constant current of I amperes interrupted at t = 0; the file holds the voltage.
    #[arg(long, value_name = "I", allow_negative_numbers = true)]
    pub relaxation_current_a: Option<f64>,
    /// A voltage step of U volts at t = 0; the file holds the current.
    #[arg(long, value_name = "U", allow_negative_numbers = true)]
    pub voltage_step_v: Option<f64>,
    /// Pre-step value v(0-) in V (or i(0-) in A); overrides samples at t < 0.
    #[arg(long, value_name = "VALUE", allow_negative_numbers = true)]
    pub baseline: Option<f64>,
    /// Also fit a blocking series capacitance (current steps only).
    #[arg(long)]
    pub series_capacitance: bool,
    /// Time bins per decade for the reduction of long records.
    #[arg(
        long,
        value_name = "N",
        default_value_t = 25.0,
        allow_negative_numbers = true
    )]
    pub bins_per_decade: f64,
    /// Skip samples before S seconds after the step (settling, lead ringing).
    #[arg(
        long,
        value_name = "S",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    pub fit_start: f64,
    /// Skip samples after S seconds after the step (a drift or a later event).
    #[arg(long, value_name = "S", allow_negative_numbers = true)]
    pub fit_end: Option<f64>,
    /// Time of the step on the file's time axis (s); times are taken relative to it.
    #[arg(
        long,
        value_name = "S",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    pub step_time: f64,
    /// Column choices.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// Shared solver options.
    #[command(flatten)]
    pub solve: SolveArgs,
}

/// Where the label of each spectrum of a series comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum LabelFrom {
    /// The last number in the file name (`cycle-012.csv`: 12; `T650C.csv`: 650).
    Name,
    /// The value of the --by column (with --series).
    Column,
    /// No label: the trend axis is the spectrum's position.
    None,
}

/// Lambda policy along a series on the command line.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum LambdaPolicyArg {
    /// One lambda for the whole series (the median choice of the rule on
    /// up to 16 spectra spread over it).
    Series,
    /// The rule chooses for every spectrum on its own.
    Each,
}

/// `taumap track`.
#[derive(Args, Debug)]
pub struct TrackArgs {
    /// Spectra in series order, or one folder of them (every .csv, .txt,
    /// .tsv and .dat file in it); ordered by the numbers in their file
    /// names (cycle-9 before cycle-10) unless --keep-order.
    #[arg(value_name = "FILE|DIR", required_unless_present = "series")]
    pub inputs: Vec<PathBuf>,
    /// One long file holding every spectrum, with a column naming each
    /// row's spectrum (give it with --by).
    #[arg(
        long,
        value_name = "FILE.csv",
        conflicts_with = "inputs",
        requires = "by"
    )]
    pub series: Option<PathBuf>,
    /// The column of --series that names the spectrum (a heading, or #N
    /// counted from 1): e.g. cycle, soc, temperature.
    #[arg(long, value_name = "COLUMN", requires = "series")]
    pub by: Option<String>,
    /// Keep the files in the order given instead of ordering them by the
    /// numbers in their names.
    #[arg(long)]
    pub keep_order: bool,
    /// Output directory (created if missing); default <folder>-track/
    /// beside the folder of the spectra, or <stem>-track/ beside --series.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Where each spectrum's label (the x axis of every trend) comes from
    /// [default: name for files when every name holds a number, column for
    /// --series when every value is a number, else none].
    #[arg(long, value_enum)]
    pub label_from: Option<LabelFrom>,
    /// The unit of the labels: K or degC make them temperatures and add
    /// Arrhenius fits (activation energies in eV); any other text (cycle,
    /// %, h) only names the axis.
    #[arg(long, value_name = "UNIT")]
    pub label_unit: Option<String>,
    /// Lambda along the series.
    #[arg(long, value_enum, default_value = "series")]
    pub lambda_policy: LambdaPolicyArg,
    /// Largest change of log10 tau (decades) between neighbouring peaks of
    /// one track.
    #[arg(
        long,
        value_name = "DECADES",
        default_value_t = 1.0,
        allow_negative_numbers = true
    )]
    pub gate_decades: f64,
    /// Largest factor of change of R between neighbouring peaks of one
    /// track.
    #[arg(
        long,
        value_name = "FACTOR",
        default_value_t = 10.0,
        allow_negative_numbers = true
    )]
    pub gate_r_factor: f64,
    /// Spectra a process may be missing from (below detection) and keep
    /// its track.
    #[arg(long, value_name = "N", default_value_t = 2)]
    pub max_gap: usize,
    /// Tracks with fewer peaks are short-lived: no trend, their area folded
    /// into a neighbour [default: 3, or 5 % of the spectra when more].
    #[arg(long, value_name = "N")]
    pub min_track_points: Option<usize>,
    /// Series terms of the model.
    #[command(flatten)]
    pub series_terms: SeriesTermArgs,
    /// Residual weighting.
    #[arg(long, value_enum, default_value = "modulus")]
    pub weighting: WeightingArg,
    /// The band of frequencies used.
    #[command(flatten)]
    pub band: FrequencyBandArgs,
    /// Column choices.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// Shared solver options.
    #[command(flatten)]
    pub solve: SolveArgs,
}

/// `taumap demo`.
#[derive(Args, Debug)]
pub struct DemoArgs {
    /// Directory for the demo data.
    #[arg(long, value_name = "DIR", default_value = "demo-data")]
    pub dir: PathBuf,
}

/// `taumap simulate`.
#[derive(Args, Debug)]
pub struct SimulateArgs {
    /// Model file: one element per line, all in series (see
    /// docs/model-format.md).
    #[arg(value_name = "MODEL")]
    pub model: PathBuf,
    /// Output CSV file (replaced atomically); `-` writes to standard output.
    #[arg(long, value_name = "FILE.csv")]
    pub out: PathBuf,
    /// Lowest frequency of the spectrum (Hz).
    #[arg(
        long,
        value_name = "HZ",
        default_value_t = 0.01,
        allow_negative_numbers = true,
        conflicts_with = "step_current_a"
    )]
    pub from_hz: f64,
    /// Highest frequency of the spectrum (Hz).
    #[arg(
        long,
        value_name = "HZ",
        default_value_t = 1e5,
        allow_negative_numbers = true,
        conflicts_with = "step_current_a"
    )]
    pub to_hz: f64,
    /// Points per decade, log-spaced [default: 10 for a spectrum, 100 for
    /// a step response].
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub per_decade: Option<f64>,
    /// Relative noise: Gaussian, of standard deviation X times |Z| on each
    /// of the real and imaginary parts of a spectrum, or X times the
    /// largest voltage change of a step response.
    #[arg(
        long,
        value_name = "X",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    pub noise_rel: f64,
    /// Seed of the noise (the same seed gives the same file).
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Write instead the voltage response to a current step of I amperes
    /// from rest at t = 0 (the input of `taumap transient
    /// --current-step-a I`).
    #[arg(long, value_name = "I", allow_negative_numbers = true)]
    pub step_current_a: Option<f64>,
    /// First sample after the step (s).
    #[arg(
        long,
        value_name = "S",
        default_value_t = 1e-6,
        allow_negative_numbers = true,
        requires = "step_current_a"
    )]
    pub from_s: f64,
    /// Last sample after the step (s).
    #[arg(
        long,
        value_name = "S",
        default_value_t = 100.0,
        allow_negative_numbers = true,
        requires = "step_current_a"
    )]
    pub to_s: f64,
}

/// `taumap model`.
#[derive(Args, Debug)]
pub struct ModelArgs {
    /// Input spectrum, as for `invert`; `-` reads standard input (then
    /// --out is needed).
    #[arg(value_name = "IN.csv")]
    pub input: PathBuf,
    /// Output directory (created if missing); default <stem>-model/ beside the input.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Largest number of processes proposed (candidates of 1..K processes).
    #[arg(long, value_name = "K", default_value_t = 4)]
    pub max_processes: usize,
    /// Fit this model (text format, as written by `model` or for
    /// `simulate`) instead of proposing candidates; parameters marked
    /// `fixed` are held.
    #[arg(long, value_name = "MODEL.txt")]
    pub start: Option<PathBuf>,
    /// Series terms of the inversion that seeds the candidates.
    #[command(flatten)]
    pub series: SeriesTermArgs,
    /// The band of frequencies used.
    #[command(flatten)]
    pub band: FrequencyBandArgs,
    /// Column choices.
    #[command(flatten)]
    pub columns: ColumnArgs,
    /// Options of the inversion that seeds the candidates.
    #[command(flatten)]
    pub solve: SolveArgs,
}
