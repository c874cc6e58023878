//! The command line: clap definitions and one small function per command; no physics here.
//!
//! Each command lives in its own file with an `Args` struct and a `run` function. Shared option
//! groups (the lens, threads) are defined here.

use crate::error::{shown, Error, Result};
use crate::lens::LensSystem;
use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

/// Command-line entry: parsed options.
#[derive(Debug, Parser)]
#[command(
    name = "causeway",
    version,
    about = "Magnification maps and finite-source light curves for gravitational microlensing",
    long_about = "Builds magnification maps of point-mass lenses (by inverse ray shooting or by \
                  inverse polygon mapping), keeps them, draws finite-source light curves from \
                  them, fits photometry with them and says what the lens is.\n\nLengths are in \
                  Einstein radii of the total lens mass, times in days; a binary is given by --s \
                  and --q, any other lens by --lenses FILE (CSV with header x,y,mass). A \
                  straight trajectory (t0, u0, tE, alpha) puts the source at time t at \
                  (tau cos alpha - u0 sin alpha, tau sin alpha + u0 cos alpha) with \
                  tau = (t - t0)/tE: at t0 it is at (-u0 sin alpha, u0 cos alpha), to the left of \
                  its motion when u0 > 0.",
    disable_help_subcommand = true,
    after_help = "Examples:\n  causeway demo\n  causeway map --s 1.1 --q 1e-3 --center 0.2,0 --width 0.5 --pixels 1000 --out planet.fits --png planet.png"
)]
pub struct Cli {
    /// The command to run.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Build one magnification map by inverse ray shooting or inverse polygon mapping.
    Map(map::MapArgs),
    /// Run the built-in demo: an invented planetary event, its map and picture.
    Demo(demo::DemoArgs),
    /// Grid builds of maps over (s, q) into the store, and store upkeep.
    Library(library::LibraryArgs),
    /// Point-source images and magnifications of listed source positions (exact, N <= 4).
    Images(images::ImagesArgs),
    /// Critical curves and caustics as CSV, and a picture.
    Caustics(caustics::CausticsArgs),
    /// Finite-source magnifications at listed points by contour integration.
    Contour(contour::ContourArgs),
    /// Light curve of a finite source along a path or a straight trajectory.
    Curve(Box<curve::CurveArgs>),
    /// A light curve read from a map against contour integration at the same points.
    Compare(Box<compare::CompareArgs>),
    /// Synthetic photometry of a binary-lens model (exact magnifications, seeded noise).
    Simulate(Box<simulate::SimulateArgs>),
    /// Fit photometry with binary-lens models: single-lens seed, grid search over a map library, refinement.
    Search(Box<search::SearchArgs>),
    /// Who the lens is: mass, distance and class posteriors from a Galactic model, with the
    /// lens-light test.
    Nature(Box<nature::NatureArgs>),
    /// Print the help of causeway or of the given command (for example `causeway help library
    /// build`).
    Help(HelpArgs),
}

/// Options of `causeway help`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  causeway help\n  causeway help search\n  causeway help library build"
)]
pub struct HelpArgs {
    /// The command (and subcommand) whose help to print; none for the overview.
    #[arg(value_name = "COMMAND")]
    pub command: Vec<String>,
}

/// Prints the long help of the named (sub)command, or of causeway.
fn print_help(args: HelpArgs) -> Result<()> {
    use clap::CommandFactory;
    let mut command = Cli::command();
    command.build();
    for name in &args.command {
        command = command
            .find_subcommand(name)
            .cloned()
            .ok_or_else(|| Error::input(format!("help: no command '{}'", shown(name))))?;
    }
    command
        .print_long_help()
        .map_err(|e| Error::io(std::path::Path::new("<stdout>"), e))
}

/// Notes for the user, printed to stderr when the command succeeds (a failing command prints its
/// one-line error alone).
static NOTES: std::sync::Mutex<Vec<String>> = std::sync::Mutex::new(Vec::new());

/// Keeps a note for the end of a successful run.
fn note(text: String) {
    NOTES.lock().unwrap_or_else(|e| e.into_inner()).push(text);
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    let result = dispatch(cli);
    if result.is_ok() {
        for text in NOTES.lock().unwrap_or_else(|e| e.into_inner()).drain(..) {
            eprintln!("causeway: note: {text}");
        }
    }
    result
}

/// Runs one command.
fn dispatch(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Map(args) => map::run(args),
        Command::Demo(args) => demo::run(args),
        Command::Library(args) => library::run(args),
        Command::Images(args) => images::run(args),
        Command::Caustics(args) => caustics::run(args),
        Command::Contour(args) => contour::run(args),
        Command::Curve(args) => curve::run(*args),
        Command::Compare(args) => compare::run(*args),
        Command::Simulate(args) => simulate::run(*args),
        Command::Search(args) => search::run(*args),
        Command::Nature(args) => nature::run(*args),
        Command::Help(args) => print_help(args),
    }
}

pub mod caustics;
pub mod compare;
pub mod contour;
pub mod curve;
pub mod demo;
pub mod images;
pub mod library;
pub mod map;
pub mod motion;
pub mod nature;
pub mod physical;
pub mod progress;
pub mod search;
pub mod simulate;

/// Library parameters whose errors name them first, and the options that set them. The
/// library speaks of its parameters (`u0_span: must be ...`); the command line names the option
/// (`--u0-span: must be ...`).
const OPTION_OF_PARAMETER: &[(&str, &str)] = &[
    ("baseline", "--baseline"),
    ("clip", "--clip"),
    ("dalpha_dt", "--dalpha-dt"),
    ("dec", "--dec"),
    ("dl", "--dl"),
    ("ds", "--ds"),
    ("ds_dt", "--ds-dt"),
    ("ephemerides", "--ephemeris"),
    ("exclude", "--exclude"),
    ("keep", "--keep"),
    ("ld", "--ld"),
    ("ld_sqrt", "--ld-sqrt"),
    ("max_trajectories", "--max-trajectories"),
    ("model_floor", "--model-floor"),
    ("point_cap", "--point-cap"),
    ("pi_ee", "--pi-e-e"),
    ("pi_en", "--pi-e-n"),
    ("parallax_minima", "--parallax-minima"),
    ("pi_rel", "--pi-rel"),
    ("q", "--q"),
    ("ra", "--ra"),
    ("refine", "--refine"),
    ("refine_within", "--refine-within"),
    ("rho", "--rho"),
    ("s", "--s"),
    ("t0_kep", "--t0-kep"),
    ("t0_par", "--t0-par"),
    ("t0_shifts", "--t0-shifts"),
    ("te_factors", "--te-factors"),
    ("theta_star", "--theta-star"),
    ("tol", "--tol"),
    ("u0_floor", "--u0-floor"),
    ("u0_misfit", "--u0-misfit"),
    ("u0_span", "--u0-span"),
];

/// A library error message as the command line shows it: a leading parameter name (followed by
/// `:` or by a value) becomes the option that sets it.
///
/// ```
/// use causeway::cli::with_option_names;
/// assert_eq!(with_option_names("u0_span: must be from 0 to 10"), "--u0-span: must be from 0 to 10");
/// assert_eq!(with_option_names("q 2e10: binaries are taken"), "--q 2e10: binaries are taken");
/// assert_eq!(with_option_names("data.csv:3: bad row"), "data.csv:3: bad row");
/// ```
pub fn with_option_names(message: &str) -> String {
    let end = message
        .find(|c: char| !(c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_'))
        .unwrap_or(message.len());
    let (head, rest) = message.split_at(end);
    let names_a_value = rest.starts_with(':')
        || rest
            .strip_prefix(' ')
            .is_some_and(|r| r.starts_with(|c: char| c.is_ascii_digit() || "+-.".contains(c)));
    match OPTION_OF_PARAMETER.iter().find(|(p, _)| *p == head) {
        Some((_, option)) if names_a_value => format!("{option}{rest}"),
        _ => message.to_string(),
    }
}

/// The lens: a binary from (s, q) or any set of point masses from a CSV file.
#[derive(Debug, Clone, Args)]
pub struct LensArgs {
    /// Binary separation s (Einstein radii of the total mass).
    #[arg(
        long,
        allow_hyphen_values = true,
        requires = "q",
        conflicts_with = "lenses"
    )]
    pub s: Option<f64>,
    /// Binary mass ratio q = m2/m1 > 0.
    #[arg(long, allow_hyphen_values = true, requires = "s")]
    pub q: Option<f64>,
    /// Lens CSV file with header x,y,mass (masses relative; normalised on load).
    #[arg(long, value_name = "FILE")]
    pub lenses: Option<PathBuf>,
}

impl LensArgs {
    /// The lens system these options describe.
    pub fn lens_system(&self) -> Result<LensSystem> {
        match (&self.lenses, self.s, self.q) {
            (Some(path), None, None) => {
                let (lens, total) = LensSystem::read_csv_with_total(path)?;
                if (total - 1.0).abs() > 1e-9 {
                    note(format!(
                        "{}: the masses sum to {}; normalised to sum 1",
                        path.display(),
                        crate::table::fmt_f64(total)
                    ));
                }
                Ok(lens)
            }
            (None, Some(s), Some(q)) => LensSystem::binary(s, q),
            _ => Err(Error::input(
                "give the lens as --s S --q Q (a binary) or --lenses FILE (CSV x,y,mass)",
            )),
        }
    }
}

/// Parallelism: how many threads.
#[derive(Debug, Clone, Args)]
pub struct ThreadArgs {
    /// Worker threads, 1 to 4 x the logical cores (default: all cores; RAYON_NUM_THREADS is
    /// honoured too).
    #[arg(long, value_name = "N", value_parser = parse_threads)]
    pub threads: Option<usize>,
}

/// The most threads a `--threads` option accepts: 4 x the logical cores.
pub fn thread_limit() -> usize {
    4 * std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// Parses a thread count: at least 1, at most [`thread_limit`].
pub fn parse_threads(s: &str) -> std::result::Result<usize, String> {
    let n: usize = s
        .trim()
        .parse()
        .map_err(|_| format!("'{}' is not a thread count", shown(s)))?;
    let limit = thread_limit();
    if n == 0 || n > limit {
        return Err(format!(
            "must be 1 to {limit} (4 x the logical cores), got {n}"
        ));
    }
    Ok(n)
}

impl ThreadArgs {
    /// Sets up the global thread pool. Call once, before any parallel work.
    pub fn install(&self) -> Result<()> {
        if let Some(n) = self.threads {
            rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build_global()
                .map_err(|e| Error::input(format!("--threads: {e}")))?;
        }
        Ok(())
    }
}

/// A list of numbers typed with commas (`0.001,0.002`), and shown the same way in `--help`.
#[derive(Debug, Clone, PartialEq)]
pub struct NumberList(pub Vec<f64>);

impl NumberList {
    /// Parses `A[,B...]`: finite numbers separated by commas.
    ///
    /// ```
    /// use causeway::cli::NumberList;
    /// assert_eq!(NumberList::parse("1e-3, 2").unwrap().0, vec![1e-3, 2.0]);
    /// assert_eq!(NumberList(vec![0.5, 2.0]).to_string(), "0.5,2");
    /// assert!(NumberList::parse("1,,2").is_err());
    /// ```
    pub fn parse(s: &str) -> std::result::Result<Self, String> {
        s.split(',')
            .map(|t| {
                t.trim()
                    .parse::<f64>()
                    .ok()
                    .filter(|v| v.is_finite())
                    .ok_or_else(|| format!("'{}' is not a finite number", shown(t)))
            })
            .collect::<std::result::Result<Vec<f64>, String>>()
            .map(NumberList)
    }
}

impl std::fmt::Display for NumberList {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let texts: Vec<String> = self.0.iter().map(|v| v.to_string()).collect();
        f.write_str(&texts.join(","))
    }
}

/// Parses `X,Y` (for example `-0.3,0.1`).
pub fn parse_pair(s: &str) -> std::result::Result<(f64, f64), String> {
    let (a, b) = s
        .split_once(',')
        .ok_or_else(|| format!("expected X,Y, got '{}'", shown(s)))?;
    let parse = |t: &str| {
        t.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| format!("'{}' is not a finite number", shown(t)))
    };
    Ok((parse(a)?, parse(b)?))
}

/// Reads a CSV of source positions (header x,y), refusing a file without rows and positions
/// beyond [`crate::map::MAX_REACH`] (file and line named).
pub fn read_points(path: &std::path::Path) -> Result<crate::table::Table> {
    let table = crate::table::Table::read(path, &["x", "y"], &[])?;
    if table.rows.is_empty() {
        return Err(Error::input(format!(
            "{}: no source positions listed",
            path.display()
        )));
    }
    let far = |r: &Vec<f64>| r[0].abs().max(r[1].abs()) > crate::map::MAX_REACH;
    if let Some(k) = table.rows.iter().position(far) {
        return Err(Error::input(format!(
            "{}:{}: the source is more than {:e} Einstein radii from the origin",
            path.display(),
            table.lines[k],
            crate::map::MAX_REACH
        )));
    }
    Ok(table)
}
