//! `causeway library`: grid builds into the map store, and its upkeep.

use super::map::certificate_line;
use super::progress::Reporter;
use super::ThreadArgs;
use crate::error::{Error, Result};
use crate::progress::Progress;
use crate::store::claim::{ClaimInfo, ClaimPolicy, REFRESH};
use crate::store::jobs::{task_memory, JobArray};
use crate::store::library::{self, BuildOptions, LibrarySpec, Outcome, PointState, Shard};
use crate::store::{index_header, Store};
use clap::{Args, Subcommand};
use std::path::PathBuf;

/// Options of `causeway library`.
#[derive(Debug, Args)]
#[command(after_help = "Examples:\n  \
    causeway library build grid.toml\n  \
    causeway library build grid.toml --store /shared/maps --shard 3/16 --threads 2\n  \
    causeway library build grid.toml --store /shared/maps --worker\n  \
    causeway library status grid.toml --store /shared/maps\n  \
    causeway library script grid.toml --tasks 16 --store /shared/maps --logs ~/logs > fill.sh\n  \
    causeway library list --s 1.2 --q 1e-3\n  \
    causeway library verify\n  \
    causeway library prune --dry-run")]
pub struct LibraryArgs {
    #[command(subcommand)]
    pub action: Action,
}

/// Where the store is.
#[derive(Debug, Clone, Args)]
pub struct StoreArgs {
    /// Store directory (default: $CAUSEWAY_STORE, else ./maps). Commands that only read or
    /// tidy a store need an existing one (marked by causeway-store.toml); builds create it.
    #[arg(long, value_name = "DIR")]
    pub store: Option<PathBuf>,
}

impl StoreArgs {
    /// Opens the existing store (for commands that read or tidy it).
    pub fn open(&self) -> Result<Store> {
        Store::open(&Store::location(self.store.as_deref()))
    }

    /// Opens the store for building, creating it if needed.
    pub fn create(&self) -> Result<Store> {
        Store::create(&Store::location(self.store.as_deref()))
    }
}

/// `causeway library` actions.
#[derive(Debug, Subcommand)]
pub enum Action {
    /// Build the maps of a spec (TOML) that the store lacks; resumable. Creates the store
    /// (a new or empty folder, marked by causeway-store.toml) if needed. Builders sharing a
    /// store claim each map first (a <hash>.claim file, refreshed every 5 s, stale after 30 s
    /// without refresh or at once when its process on this host is gone), so none is built
    /// twice; a build waits for the maps other builders hold, and ends with all of its maps
    /// in the store.
    Build {
        /// Library spec (TOML): s and q values, window, pixels, rays.
        spec: PathBuf,
        /// Build only shard K of N (for cluster job arrays), e.g. 3/16.
        #[arg(
            long,
            value_name = "K/N",
            conflicts_with = "worker",
            allow_hyphen_values = true
        )]
        shard: Option<Shard>,
        /// Take the next unclaimed map of the whole spec until none is left, and end without
        /// waiting for maps other builders hold (the tasks of a job array balance themselves).
        /// A worker trusts indexed maps whose file is there (a plain build reads and verifies
        /// them, and rebuilds a damaged one).
        #[arg(long)]
        worker: bool,
        /// Only parse and validate the spec, and print how many maps it holds and the memory
        /// a build needs; build nothing and leave the store alone.
        #[arg(long)]
        check: bool,
        #[command(flatten)]
        store: StoreArgs,
        #[command(flatten)]
        threads: ThreadArgs,
    },
    /// Print a Slurm job-array script that fills the store from a spec with N worker tasks
    /// (each takes the next unclaimed map until none is left). Memory per task is the engine's
    /// estimate for the largest map at T threads plus room; paths are made absolute; each task
    /// logs to LOGS/causeway-library-<job>_<task>.log.
    Script {
        /// Library spec (TOML).
        spec: PathBuf,
        /// Number of array tasks.
        #[arg(
            long,
            value_name = "N",
            visible_alias = "shards",
            allow_hyphen_values = true
        )]
        tasks: usize,
        /// Threads (CPUs) per task.
        #[arg(
            long,
            default_value_t = 1,
            value_name = "T",
            allow_hyphen_values = true
        )]
        threads_per_task: usize,
        /// Existing folder for the tasks' logs (default: the current folder).
        #[arg(long, value_name = "DIR")]
        logs: Option<PathBuf>,
        /// Time limit per task, in Slurm's notation (e.g. 2:00:00 or 1-00:00:00).
        #[arg(long, value_name = "LIMIT")]
        time: Option<String>,
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Where each map of a spec stands (CSV on stdout: index, s, q, file, state, and for a
    /// claimed map its holder: host, pid, since (UTC), seconds since its last refresh,
    /// stale); a count of built, claimed and missing maps on stderr.
    Status {
        /// Library spec (TOML).
        spec: PathBuf,
        #[command(flatten)]
        store: StoreArgs,
    },
    /// List the maps in the store (CSV), optionally those at or nearest to (s, q).
    List {
        /// Separation to look up (with --q); matched to a relative 1e-9.
        #[arg(long, requires = "q", allow_hyphen_values = true)]
        s: Option<f64>,
        /// Mass ratio to look up (with --s); matched to a relative 1e-9.
        #[arg(long, requires = "s", allow_hyphen_values = true)]
        q: Option<f64>,
        /// With --s/--q: how many nearest grid points in (log s, log q); 0 = exact match only.
        #[arg(long, default_value_t = 0, allow_hyphen_values = true)]
        nearest: usize,
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Re-check every map's checksums and header against its key; report each bad entry,
    /// complete maps not yet indexed (which the next build adopts), and builders' claims.
    Verify {
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Remove damaged maps, stale temporary files and stale claims of the store, index
    /// complete maps it does not list, and drop index entries whose file is missing. Touches
    /// only the store's own files (hash-named maps and claims, temporaries) in its folder;
    /// never a live builder's claim.
    Prune {
        /// Only remove files at least this old (seconds): younger ones may belong to a build
        /// still running.
        #[arg(
            long,
            default_value_t = 3600,
            value_name = "SECONDS",
            allow_hyphen_values = true
        )]
        min_age: u64,
        /// List what would be removed or adopted, and change nothing.
        #[arg(long)]
        dry_run: bool,
        #[command(flatten)]
        store: StoreArgs,
    },
}

/// Runs `causeway library`.
pub fn run(args: LibraryArgs) -> Result<()> {
    match args.action {
        Action::Build {
            spec,
            shard,
            worker,
            check,
            store,
            threads,
        } => {
            threads.install()?;
            let lib = LibrarySpec::read(&spec)?;
            let points = match shard {
                Some(sh) => lib.shard(sh)?,
                None => lib.points()?,
            };
            if check {
                return check_spec(&spec, &lib, points.len());
            }
            build(&store.create()?, &points, worker)
        }
        Action::Script {
            spec,
            tasks,
            threads_per_task,
            logs,
            time,
            store,
        } => script(&spec, tasks, threads_per_task, logs, time, &store),
        Action::Status { spec, store } => status(&LibrarySpec::read(&spec)?, &store.open()?),
        Action::List {
            s,
            q,
            nearest,
            store,
        } => list(&store.open()?, s.zip(q), nearest),
        Action::Verify { store } => verify(&store.open()?),
        Action::Prune {
            min_age,
            dry_run,
            store,
        } => prune(
            &store.open()?,
            std::time::Duration::from_secs(min_age),
            dry_run,
        ),
    }
}

/// `library build`: progress (a bar, or plain lines and a line per map built in a batch log)
/// and a closing summary on stderr.
fn build(store: &Store, points: &[library::GridPoint], worker: bool) -> Result<()> {
    let reporter = Reporter::new();
    let stage = if worker { "worker" } else { "library" };
    reporter.start(stage, points.len() as u64);
    let started = std::time::Instant::now();
    let options = BuildOptions {
        wait: !worker,
        read_present: !worker,
        ..BuildOptions::default()
    };
    let summary = library::build_with(store, points, options, |p, outcome| {
        if outcome == Outcome::Built {
            reporter.item(&format!(
                "built {} (s = {}, q = {}) at {:.1} s",
                p.key.file_name(),
                p.s,
                p.q,
                started.elapsed().as_secs_f64()
            ));
        }
        reporter.advance(1);
    })?;
    let others = match (summary.elsewhere, worker) {
        (0, _) => String::new(),
        (n, true) => format!(", {n} left to other builders"),
        (n, false) => format!(", {n} built by other builders"),
    };
    reporter.finish(&format!(
        "{stage}: {} maps built, {} already present{others}, {:.1} s, store {}",
        summary.built,
        summary.skipped,
        started.elapsed().as_secs_f64(),
        store.root().display()
    ));
    Ok(())
}

/// `library script`: the job-array script on stdout.
fn script(
    spec: &std::path::Path,
    tasks: usize,
    threads: usize,
    logs: Option<PathBuf>,
    time: Option<String>,
    store: &StoreArgs,
) -> Result<()> {
    if tasks == 0 || threads == 0 {
        return Err(Error::input(
            "--tasks and --threads-per-task must be at least 1",
        ));
    }
    let lib = LibrarySpec::read(spec)?;
    let absolute = |p: &std::path::Path| std::path::absolute(p).map_err(|e| Error::io(p, e));
    let logs = absolute(&logs.unwrap_or_else(|| PathBuf::from(".")))?;
    if !logs.is_dir() {
        return Err(Error::input(format!(
            "--logs {}: no such folder (Slurm does not create it; make it first)",
            logs.display()
        )));
    }
    let program =
        std::env::current_exe().map_err(|e| Error::io(std::path::Path::new("causeway"), e))?;
    let job = JobArray {
        program,
        spec: absolute(spec)?,
        store: absolute(&Store::location(store.store.as_deref()))?,
        logs: normal(&logs),
        tasks,
        threads,
        memory: task_memory(&lib, threads)?,
        time,
    };
    print!("{}", job.script()?);
    Ok(())
}

/// `path` without `.` components (`/a/./b` to `/a/b`).
fn normal(path: &std::path::Path) -> PathBuf {
    path.components()
        .filter(|c| !matches!(c, std::path::Component::CurDir))
        .collect()
}

/// `library status`: a row per grid point on stdout, the counts on stderr.
fn status(spec: &LibrarySpec, store: &Store) -> Result<()> {
    let points = spec.points()?;
    let states = library::status(store, &points, ClaimPolicy::default())?;
    println!("index,s,q,file,state,host,pid,since,refreshed_s_ago,stale");
    let (mut built, mut claimed, mut stale, mut missing) = (0, 0, 0, 0);
    for (p, state) in points.iter().zip(&states) {
        let head = format!("{},{},{},{}", p.index, p.s, p.q, p.key.file_name());
        match state {
            PointState::Built => {
                built += 1;
                println!("{head},built,,,,,");
            }
            PointState::Missing => {
                missing += 1;
                println!("{head},missing,,,,,");
            }
            PointState::Claimed(info) => {
                claimed += 1;
                stale += usize::from(info.stale);
                println!("{head},claimed,{}", holder_fields(info));
            }
        }
    }
    eprintln!(
        "status: {built} built, {claimed} claimed ({stale} stale), {missing} missing of {} in {}",
        points.len(),
        store.root().display()
    );
    Ok(())
}

/// `host,pid,since,refreshed_s_ago,stale` of a claim (empty holder fields while unreadable).
fn holder_fields(info: &ClaimInfo) -> String {
    let (host, pid, since) = match &info.holder {
        Some(h) => (h.host.clone(), h.pid.to_string(), h.since.clone()),
        None => Default::default(),
    };
    format!(
        "{host},{pid},{since},{:.0},{}",
        info.age.as_secs_f64(),
        info.stale
    )
}

/// `library list`: the index, or the maps at or nearest to (s, q).
fn list(store: &Store, point: Option<(f64, f64)>, nearest: usize) -> Result<()> {
    let entries = match point {
        Some((s, q)) => {
            // The ranges of a binary: no store holds a map outside them.
            crate::lens::LensSystem::binary(s, q)?;
            let found = if nearest > 0 {
                store.nearest(s, q, nearest)?
            } else {
                store.find(s, q)?
            };
            if found.is_empty() {
                eprintln!(
                    "list: no map at s = {s}, q = {q} in {} (--nearest N lists the nearest)",
                    store.root().display()
                );
            }
            found
        }
        None => store.entries()?,
    };
    println!("{}", index_header());
    for e in entries {
        println!("{}", e.row());
    }
    Ok(())
}

/// `library verify`: every problem on stdout; fails when there is any.
fn verify(store: &Store) -> Result<()> {
    let report = store.verify()?;
    for (path, c) in &report.certificates {
        match c {
            Some(c) => println!("{}: {}", path.display(), certificate_line(c)),
            None => println!(
                "{}: no accuracy certificate (built before certificates)",
                path.display()
            ),
        }
    }
    for p in &report.problems {
        println!("{}: {}", p.path.display(), p.reason);
    }
    for e in &report.unindexed {
        println!(
            "{}: complete, not yet indexed (the next build adopts it)",
            store.root().join(&e.file).display()
        );
    }
    for c in &report.claims {
        let who = match &c.holder {
            Some(h) => format!("{} pid {} since {} UTC", h.host, h.pid, h.since),
            None => "a builder still writing it".into(),
        };
        let state = if c.stale {
            format!(
                "stale (not refreshed for {:.0} s; the next build takes it over, prune removes it)",
                c.age.as_secs_f64()
            )
        } else {
            format!("live (refreshed every {} s)", REFRESH.as_secs())
        };
        println!("{}: claimed by {who}, {state}", c.path.display());
    }
    let total = report.indexed;
    if report.problems.is_empty() {
        eprintln!("verify: all {total} indexed maps verify");
        Ok(())
    } else {
        Err(Error::Numerical(format!(
            "verify: {} bad entries ({total} indexed) in {}",
            report.problems.len(),
            store.root().display()
        )))
    }
}

/// `library prune`: what was removed and adopted on stdout, a summary on stderr.
fn prune(store: &Store, min_age: std::time::Duration, dry_run: bool) -> Result<()> {
    let report = store.prune(min_age, dry_run)?;
    let (remove, adopt) = if dry_run {
        ("would remove", "would adopt")
    } else {
        ("removed", "adopted")
    };
    for p in &report.removed {
        println!("{remove} {}", p.display());
    }
    for p in &report.adopted {
        println!("{adopt} {}", p.display());
    }
    eprintln!(
        "prune: {remove} {} files, {adopt} {} maps, {} younger than --min-age kept{}",
        report.removed.len(),
        report.adopted.len(),
        report.young.len(),
        if dry_run {
            " (dry run: nothing changed)"
        } else {
            ""
        }
    );
    Ok(())
}

/// `library build --check`: the spec is valid; says how many maps it holds and what a build
/// of its largest map needs, and builds nothing.
fn check_spec(path: &std::path::Path, lib: &LibrarySpec, maps: usize) -> Result<()> {
    let memory = task_memory(lib, rayon::current_num_threads())?;
    eprintln!(
        "{}: valid; {maps} maps, a build needs about {} at {} threads; nothing built",
        path.display(),
        crate::engine::gib(memory),
        rayon::current_num_threads()
    );
    Ok(())
}
