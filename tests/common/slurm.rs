//! A private one-node Slurm cluster for a test or a bench: `scripts/slurm-local.sh` starts it
//! in a folder of its own and [`LocalSlurm`] stops it when dropped (also when a test fails).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::{AtomicU16, Ordering};
use std::time::{Duration, Instant};

/// Variable under which a missing scheduler is a failure rather than a skip (CI sets it).
pub const REQUIRE: &str = "CAUSEWAY_REQUIRE_SLURM";

/// A running local cluster.
pub struct LocalSlurm {
    dir: PathBuf,
    conf: PathBuf,
    stopped: bool,
}

/// Why no cluster can be started here, or `None` when one can (the daemons and the client
/// commands are installed, and this process runs as root).
pub fn unavailable() -> Option<String> {
    for tool in ["munged", "slurmctld", "slurmd", "sbatch", "squeue", "sinfo"] {
        let found = Command::new("sh")
            .args(["-c", &format!("command -v {tool}")])
            .output()
            .is_ok_and(|o| o.status.success());
        if !found {
            return Some(format!(
                "{tool} is not installed (Debian: apt-get install slurmctld slurmd munge)"
            ));
        }
    }
    let uid = Command::new("id").arg("-u").output().ok();
    let root = uid.is_some_and(|o| String::from_utf8_lossy(&o.stdout).trim() == "0");
    (!root).then(|| "the local cluster's daemons run as root, and this is not root".into())
}

impl LocalSlurm {
    /// Starts a cluster with its files in `dir` (the script's `start`); panics with the
    /// script's output when it does not come up.
    pub fn start(dir: &Path) -> LocalSlurm {
        // Ports of their own for the clusters of this process (17000 to 25006, below the
        // ephemeral range), so that a leftover cluster elsewhere does not answer.
        static NEXT: AtomicU16 = AtomicU16::new(0);
        let port = 17000
            + 8 * (std::process::id() % 1000) as u16
            + 2 * (NEXT.fetch_add(1, Ordering::Relaxed) % 4);
        let out = Command::new(script())
            .args(["start"])
            .arg(dir)
            .env("SLURM_LOCAL_PORT", port.to_string())
            .output()
            .expect("scripts/slurm-local.sh runs");
        let mut cluster = LocalSlurm {
            dir: dir.to_path_buf(),
            conf: dir.join("slurm.conf"),
            stopped: false,
        };
        if !out.status.success() {
            cluster.stop();
            panic!(
                "the local cluster did not start: {}{}",
                String::from_utf8_lossy(&out.stdout),
                String::from_utf8_lossy(&out.stderr)
            );
        }
        cluster
    }

    /// A Slurm client command aimed at this cluster.
    pub fn command(&self, program: &str) -> Command {
        let mut cmd = Command::new(program);
        cmd.env("SLURM_CONF", &self.conf);
        cmd
    }

    /// Submits the batch script `script` from `cwd`; returns the job id.
    pub fn submit(&self, script: &Path, cwd: &Path) -> u64 {
        let out = self
            .command("sbatch")
            .arg("--parsable")
            .arg(script)
            .current_dir(cwd)
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(
            out.status.success(),
            "sbatch: {text}{}",
            String::from_utf8_lossy(&out.stderr)
        );
        text.trim()
            .split(';')
            .next()
            .unwrap()
            .parse()
            .expect("a job id")
    }

    /// Waits until job `job` (every task of an array) has left the queue; panics after
    /// `timeout`.
    pub fn wait(&self, job: u64, timeout: Duration) {
        let started = Instant::now();
        loop {
            let out = self
                .command("squeue")
                .args(["-h", "-o", "%i %T", "-j", &job.to_string()])
                .output()
                .unwrap();
            let queue = String::from_utf8_lossy(&out.stdout).trim().to_string();
            // squeue refuses a job id it no longer knows: the job has ended (any other
            // failure, a busy controller say, is asked again).
            let forgotten = String::from_utf8_lossy(&out.stderr).contains("Invalid job id");
            if (out.status.success() && queue.is_empty()) || forgotten {
                return;
            }
            assert!(
                started.elapsed() < timeout,
                "job {job} still queued after {timeout:?}: {queue}"
            );
            std::thread::sleep(Duration::from_millis(100));
        }
    }

    /// The job-completion records of the tasks of array job `job` (one line each).
    pub fn completions(&self, job: u64) -> Vec<String> {
        let text = std::fs::read_to_string(self.dir.join("jobcomp.txt")).unwrap_or_default();
        let tag = format!("ArrayJobId={job} ");
        text.lines()
            .filter(|l| l.contains(&tag))
            .map(str::to_string)
            .collect()
    }

    /// Process ids of the cluster's daemons (from their pid files).
    pub fn daemon_pids(&self) -> Vec<u32> {
        ["slurmctld.pid", "slurmd.pid", "munge/munged.pid"]
            .iter()
            .filter_map(|f| std::fs::read_to_string(self.dir.join(f)).ok())
            .filter_map(|t| t.trim().parse().ok())
            .collect()
    }

    /// Cancels the cluster's jobs and stops its daemons (the script's `stop`).
    pub fn stop(&mut self) {
        if self.stopped {
            return;
        }
        self.stopped = true;
        let _ = Command::new(script()).arg("stop").arg(&self.dir).status();
    }
}

/// The cluster's start and stop script.
fn script() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/slurm-local.sh")
}

impl Drop for LocalSlurm {
    fn drop(&mut self) {
        self.stop();
    }
}
