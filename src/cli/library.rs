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
    causeway library prune")]
pub struct LibraryArgs {
    #[command(subcommand)]
    pub action: Action,
}

/// Where the store is.
#[derive(Debug, Clone, Args)]
pub struct StoreArgs {
    /// Store directory (default: $CAUSEWAY_STORE, else ./maps).
    #[arg(long, value_name = "DIR")]
    pub store: Option<PathBuf>,
}

impl StoreArgs {
    /// Opens the store.
    pub fn open(&self) -> Result<Store> {
        Store::open(&Store::location(self.store.as_deref()))
    }
}

/// `causeway library` actions.
#[derive(Debug, Subcommand)]
pub enum Action {
    /// Build the maps of a spec (TOML) that the store lacks; resumable.
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
    /// List the maps in the store (CSV), optionally those nearest to (s, q).
    List {
        /// Separation to look up (with --q).
        #[arg(long, requires = "q")]
        s: Option<f64>,
        /// Mass ratio to look up (with --s).
        #[arg(long, requires = "s")]
        q: Option<f64>,
        /// With --s/--q: how many nearest grid points in (log s, log q); 0 = exact match only.
        #[arg(long, default_value_t = 0)]
        nearest: usize,
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Re-check every map's checksums and header against its key; report each bad entry.
    Verify {
        #[command(flatten)]
        store: StoreArgs,
    },
    /// Remove maps that fail verification or that the index does not name, and stale
    /// temporary files.
    Prune {
        /// Only remove temporary files at least this old (seconds): they may belong to a build
        /// still running.
        #[arg(long, default_value_t = 3600)]
        min_age: u64,
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
            let store = store.open()?;
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
        } => {
            let store = store.open()?;
            let entries = match (s, q) {
                (Some(s), Some(q)) if nearest > 0 => store.nearest(s, q, nearest)?,
                (Some(s), Some(q)) => store.find(s, q)?,
                _ => store.entries()?,
            };
            println!("{}", index_header());
            for e in entries {
                println!("{}", e.row());
            }
            Ok(())
        }
        Action::Verify { store } => {
            let store = store.open()?;
            let problems = store.verify()?;
            let total = store.entries()?.len();
            for p in &problems {
                println!("{}: {}", p.path.display(), p.reason);
            }
            if problems.is_empty() {
                eprintln!("verify: all {total} maps verify");
                Ok(())
            } else {
                Err(Error::Numerical(format!(
                    "verify: {} bad entries of {total} in {}",
                    problems.len(),
                    store.root().display()
                )))
            }
        }
        Action::Prune { min_age, store } => {
            let store = store.open()?;
            let removed = store.prune(std::time::Duration::from_secs(min_age))?;
            for p in &removed {
                println!("removed {}", p.display());
            }
            eprintln!("prune: removed {} files", removed.len());
            Ok(())
        }
    }
}
