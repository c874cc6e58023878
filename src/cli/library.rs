//! `causeway library`: grid builds into the map store, and its upkeep.

use super::map::progress_bar;
use super::ThreadArgs;
use crate::error::{Error, Result};
use crate::store::library::{self, job_array_script, LibrarySpec, Shard};
use crate::store::{index_header, Store};
use clap::{Args, Subcommand};
use std::path::PathBuf;

/// Options of `causeway library`.
#[derive(Debug, Args)]
#[command(after_help = "Examples:\n  \
    causeway library build grid.toml\n  \
    causeway library build grid.toml --store /shared/maps --shard 3/16 --threads 2\n  \
    causeway library script grid.toml --shards 16 --store /shared/maps > fill.sh\n  \
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
    /// (a new or empty folder, marked by causeway-store.toml) if needed.
    Build {
        /// Library spec (TOML): s and q values, window, pixels, rays.
        spec: PathBuf,
        /// Build only shard K of N (for cluster job arrays), e.g. 3/16.
        #[arg(long, value_name = "K/N")]
        shard: Option<Shard>,
        #[command(flatten)]
        store: StoreArgs,
        #[command(flatten)]
        threads: ThreadArgs,
    },
    /// Print a job-array script that fills the store from a spec in N tasks.
    Script {
        /// Library spec (TOML).
        spec: PathBuf,
        /// Number of array tasks.
        #[arg(long, value_name = "N")]
        shards: usize,
        /// Threads per task.
        #[arg(long, default_value_t = 1, value_name = "T")]
        threads_per_task: usize,
        #[command(flatten)]
        store: StoreArgs,
    },
    /// List the maps in the store (CSV), optionally those at or nearest to (s, q).
    List {
        /// Separation to look up (with --q); matched to a relative 1e-9.
        #[arg(long, requires = "q")]
        s: Option<f64>,
        /// Mass ratio to look up (with --s); matched to a relative 1e-9.
        #[arg(long, requires = "s")]
        q: Option<f64>,
        /// With --s/--q: how many nearest grid points in (log s, log q); 0 = exact match only.
        #[arg(long, default_value_t = 0)]
        nearest: usize,
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Re-check every map's checksums and header against its key; report each bad entry,
    /// and complete maps not yet indexed (which the next build adopts).
    Verify {
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Remove damaged maps and stale temporary files of the store, index complete maps it
    /// does not list, and drop index entries whose file is missing. Touches only the store's
    /// own files (hash-named maps, temporaries) in its folder.
    Prune {
        /// Only remove files at least this old (seconds): younger ones may belong to a build
        /// still running.
        #[arg(long, default_value_t = 3600, value_name = "SECONDS")]
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
            store,
            threads,
        } => {
            threads.install()?;
            let lib = LibrarySpec::read(&spec)?;
            let points = match shard {
                Some(sh) => lib.shard(sh)?,
                None => lib.points()?,
            };
            let store = store.create()?;
            let bar = progress_bar("library");
            bar.set_length(points.len() as u64);
            let started = std::time::Instant::now();
            let summary = library::build(&store, &points, |_, _| bar.inc(1))?;
            bar.finish_and_clear();
            eprintln!(
                "library: {} maps built, {} already present, {:.1} s, store {}",
                summary.built,
                summary.skipped,
                started.elapsed().as_secs_f64(),
                store.root().display()
            );
            Ok(())
        }
        Action::Script {
            spec,
            shards,
            threads_per_task,
            store,
        } => {
            if shards == 0 || threads_per_task == 0 {
                return Err(Error::input(
                    "--shards and --threads-per-task must be at least 1",
                ));
            }
            LibrarySpec::read(&spec)?;
            let root = Store::location(store.store.as_deref());
            let root = std::path::absolute(&root).unwrap_or(root);
            print!(
                "{}",
                job_array_script(
                    &spec.display().to_string(),
                    &root.display().to_string(),
                    shards,
                    threads_per_task
                )
            );
            Ok(())
        }
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

/// `library list`: the index, or the maps at or nearest to (s, q).
fn list(store: &Store, point: Option<(f64, f64)>, nearest: usize) -> Result<()> {
    let entries = match point {
        Some((s, q)) => {
            for (name, v) in [("--s", s), ("--q", q)] {
                if !(v.is_finite() && v > 0.0) {
                    return Err(Error::input(format!(
                        "{name}: must be a finite number > 0, got {v}"
                    )));
                }
            }
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
    for p in &report.problems {
        println!("{}: {}", p.path.display(), p.reason);
    }
    for e in &report.unindexed {
        println!(
            "{}: complete, not yet indexed (the next build adopts it)",
            store.root().join(&e.file).display()
        );
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
