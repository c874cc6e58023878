//! Job-array scripts for Slurm: a library filled by an array of worker tasks.
//!
//! Every task runs `library build SPEC --worker`: it takes the next unclaimed map until none is
//! left, so an array of any size balances itself and a rerun resumes. The script names every
//! path absolutely (tasks start wherever the scheduler puts them), asks for the memory the
//! engine estimates for the spec's largest map at the task's thread count (plus room for the
//! program and the finished map), and writes one log per task.

use super::library::LibrarySpec;
use crate::engine;
use crate::error::{shown, Error, Result};
use std::path::{Path, PathBuf};

/// Memory a task needs besides the engine's working memory: the program, its threads'
/// stacks and buffers (measured peak of a small build: about 30 MiB; doubled, rounded up).
pub const TASK_BASE_MEMORY: u64 = 64 << 20;

/// A job array that fills a store from a spec.
#[derive(Debug, Clone, PartialEq)]
pub struct JobArray {
    /// The causeway program the tasks run (absolute).
    pub program: PathBuf,
    /// The library spec (absolute).
    pub spec: PathBuf,
    /// The store (absolute).
    pub store: PathBuf,
    /// The folder of the tasks' logs (absolute, existing when the array is submitted).
    pub logs: PathBuf,
    /// Number of array tasks.
    pub tasks: usize,
    /// Threads (CPUs) per task.
    pub threads: usize,
    /// Memory per task in bytes ([`task_memory`]).
    pub memory: u64,
    /// Optional time limit per task, in Slurm's notation (`D-HH:MM:SS`, `HH:MM:SS`, minutes).
    pub time: Option<String>,
}

/// The memory one task of `threads` threads needs to build the largest map of `spec`: the
/// engine's own estimate, the finished map (single-precision pixels, written out once), and
/// [`TASK_BASE_MEMORY`].
///
/// ```
/// use causeway::store::{jobs::task_memory, library::LibrarySpec};
/// let spec = LibrarySpec::parse("s = [1.0]\nq = [1e-3]\npixels = 1000\nrays = 10\n\
///     [window]\ncenter = [0.0, 0.0]\nwidth = 2.0\n", "lib.toml").unwrap();
/// let one = task_memory(&spec, 1).unwrap();
/// assert!(one > 8_000_000 && one < 200 << 20, "{one}");
/// assert!(task_memory(&spec, 4).unwrap() > one); // a buffer per thread
/// ```
pub fn task_memory(spec: &LibrarySpec, threads: usize) -> Result<u64> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|e| Error::input(format!("threads: {e}")))?;
    let builder = engine::by_name(&spec.engine, spec.density)?;
    let points = spec.points()?;
    let engine_peak = pool.install(|| {
        points
            .iter()
            .map(|p| builder.memory_bytes(&p.key.lens, &p.key.window))
            .max()
            .unwrap_or(0)
    });
    let pixels = points
        .iter()
        .map(|p| p.key.window.pixel_count() as u64)
        .max()
        .unwrap_or(0);
    Ok(engine_peak + 8 * pixels + TASK_BASE_MEMORY)
}

impl JobArray {
    /// The script, ready for `sbatch`. Paths with whitespace or quotes are refused (Slurm's
    /// `#SBATCH` lines cannot hold them safely).
    ///
    /// ```
    /// use causeway::store::jobs::JobArray;
    /// let job = JobArray {
    ///     program: "/opt/causeway/bin/causeway".into(),
    ///     spec: "/home/a/grid.toml".into(),
    ///     store: "/shared/maps".into(),
    ///     logs: "/home/a/logs".into(),
    ///     tasks: 8,
    ///     threads: 2,
    ///     memory: 3 << 30,
    ///     time: None,
    /// };
    /// let script = job.script().unwrap();
    /// assert!(script.contains("#SBATCH --array=1-8\n"));
    /// assert!(script.contains("#SBATCH --mem=3072M\n"));
    /// assert!(script.contains("#SBATCH --output=/home/a/logs/causeway-library-%A_%a.log\n"));
    /// assert!(script.contains("library build /home/a/grid.toml --store /shared/maps --worker"));
    /// ```
    pub fn script(&self) -> Result<String> {
        let paths = [
            ("program", &self.program),
            ("spec", &self.spec),
            ("store", &self.store),
            ("logs", &self.logs),
        ];
        for (what, path) in paths {
            plain(what, path)?;
        }
        if self.tasks == 0 || self.threads == 0 {
            return Err(Error::input(
                "job array: tasks and threads per task must be at least 1",
            ));
        }
        let mib = self.memory.div_ceil(1 << 20).max(1);
        let time = match &self.time {
            Some(t)
                if t.chars()
                    .all(|c| c.is_ascii_digit() || c == ':' || c == '-') =>
            {
                format!("#SBATCH --time={t}\n")
            }
            Some(t) => {
                return Err(Error::input(format!(
                    "job array: time limit '{}' is not D-HH:MM:SS, HH:MM:SS or minutes",
                    shown(t)
                )))
            }
            None => String::new(),
        };
        let (program, spec, store, logs) = (
            self.program.display(),
            self.spec.display(),
            self.store.display(),
            self.logs.display(),
        );
        let (tasks, threads) = (self.tasks, self.threads);
        Ok(format!(
            "#!/bin/bash\n\
             # Fills the map store {store} from {spec} with {tasks} array tasks. Each task takes\n\
             # the next unclaimed map until none is left, so the tasks balance themselves; rerun\n\
             # the array (or any task) to resume. Where it stands:\n\
             #   {program} library status {spec} --store {store}\n\
             # Memory per task: the engine's estimate for the largest map at {threads} threads,\n\
             # plus the finished map and the program. The log folder must exist at submission.\n\
             #SBATCH --job-name=causeway-library\n\
             #SBATCH --array=1-{tasks}\n\
             #SBATCH --ntasks=1\n\
             #SBATCH --cpus-per-task={threads}\n\
             #SBATCH --mem={mib}M\n\
             #SBATCH --output={logs}/causeway-library-%A_%a.log\n\
             {time}\
             set -euo pipefail\n\
             echo \"task ${{SLURM_ARRAY_TASK_ID:-1}} of {tasks} on $(hostname), pid $$\"\n\
             exec {program} library build {spec} --store {store} --worker --threads {threads}\n"
        ))
    }
}

/// Refuses a relative path, or one that a script line cannot hold unquoted.
fn plain(what: &str, path: &Path) -> Result<()> {
    let text = path.to_string_lossy();
    let bad = text
        .chars()
        .find(|c| c.is_whitespace() || c.is_control() || "'\"\\$`;&|<>*?()[]{}#!~".contains(*c));
    if let Some(c) = bad {
        return Err(Error::input(format!(
            "job array: the {what} path {} holds {c:?}, which a job script cannot carry \
             unquoted; use a path without it",
            shown(&text)
        )));
    }
    if !path.is_absolute() {
        return Err(Error::input(format!(
            "job array: the {what} path {} must be absolute",
            shown(&text)
        )));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn job() -> JobArray {
        JobArray {
            program: "/opt/causeway".into(),
            spec: "/home/a/grid.toml".into(),
            store: "/shared/maps".into(),
            logs: "/home/a/logs".into(),
            tasks: 4,
            threads: 1,
            memory: 100 << 20,
            time: Some("1-00:00:00".into()),
        }
    }

    /// A change that spoils a job, and what the refusal names.
    type Spoiled = (fn(&mut JobArray), &'static str);

    #[test]
    fn scripts_refuse_what_a_job_line_cannot_carry() {
        assert!(job()
            .script()
            .unwrap()
            .contains("#SBATCH --time=1-00:00:00\n"));
        let cases: [Spoiled; 5] = [
            (|j| j.store = "maps".into(), "must be absolute"),
            (|j| j.logs = "/home/a/my logs".into(), "logs path"),
            (|j| j.spec = "/home/a/$HOME.toml".into(), "spec path"),
            (|j| j.time = Some("1h; rm".into()), "time limit"),
            (|j| j.tasks = 0, "at least 1"),
        ];
        for (spoil, culprit) in cases {
            let mut j = job();
            spoil(&mut j);
            let err = j.script().unwrap_err().to_string();
            assert!(err.contains(culprit), "{err}");
        }
    }
}
