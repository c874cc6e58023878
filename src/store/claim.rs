//! Claims: how builders sharing a store (threads, processes, tasks on many hosts over a shared
//! file system) agree that exactly one of them builds each map.
//!
//! A builder takes the map `<hash>.fits` by creating `<hash>.claim` with an exclusive create
//! (`O_CREAT | O_EXCL`, atomic on local file systems and NFSv3 or later). The claim holds the
//! builder's host, pid, process start and the time it was taken, and a token unique to the
//! claim. While the map is built a thread touches the claim's modification time every
//! [`REFRESH`]; the builder removes the claim once the map is in the store and indexed.
//!
//! A claim is stale, and may be taken over, when it was not refreshed for [`STALE_AFTER`]
//! (six refresh periods: a slow but live build keeps refreshing and is never taken), or at
//! once when its holder ran on this host and that process is gone. The ages are read against
//! this host's clock, so the hosts sharing a store must keep their clocks within a fraction of
//! [`STALE_AFTER`] of one another (NTP does), and the builders of one host must see one
//! another's processes (one pid namespace). A takeover happens under the store's lock: the
//! stale claim is renamed to a temporary name (`.<hash>.claim.<pid>.<n>.tmp`), removed, and the
//! claim created anew, so two builders never take over the same claim.

use super::layout::{claim_name, is_claim_name};
use super::Store;
use crate::error::{Error, Result};
use serde::Deserialize;
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Condvar, Mutex};
use std::time::{Duration, SystemTime};

/// How often a builder refreshes its claims (touches their modification time).
pub const REFRESH: Duration = Duration::from_secs(5);

/// How long a claim may go unrefreshed before it is stale: six refresh periods.
pub const STALE_AFTER: Duration = Duration::from_secs(30);

/// The refresh period and staleness age of claims ([`REFRESH`] and [`STALE_AFTER`] by
/// default; tests shorten them).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ClaimPolicy {
    /// Time between two refreshes of a held claim.
    pub refresh: Duration,
    /// Age of the last refresh past which a claim is stale.
    pub stale_after: Duration,
}

impl Default for ClaimPolicy {
    fn default() -> Self {
        ClaimPolicy {
            refresh: REFRESH,
            stale_after: STALE_AFTER,
        }
    }
}

/// Who holds a claim, as written in the claim file.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Holder {
    /// Host name of the builder.
    pub host: String,
    /// The host's boot id (Linux), which tells a rebooted host apart.
    #[serde(default)]
    pub boot: String,
    /// Process id of the builder.
    pub pid: u32,
    /// The process's start (clock ticks after boot, Linux), which tells a reused pid apart.
    #[serde(default)]
    pub process_start: u64,
    /// When the claim was taken (UTC, `YYYY-MM-DDThh:mm:ss`).
    pub since: String,
    /// Unique to this claim.
    pub token: String,
}

impl Holder {
    /// The holder of a claim this process takes now.
    fn me() -> Holder {
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        let host = host_name();
        let pid = std::process::id();
        let nanos = SystemTime::now()
            .duration_since(SystemTime::UNIX_EPOCH)
            .map(|d| d.as_nanos())
            .unwrap_or(0);
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        Holder {
            token: format!("{host}-{pid}-{nanos}-{n}"),
            host,
            boot: boot_id(),
            pid,
            process_start: process_start(pid).unwrap_or(0),
            since: crate::map::utc_now(),
        }
    }

    fn text(&self) -> String {
        let quoted = |s: &str| format!("{s:?}");
        format!(
            "# A builder is making the map of the same name; removed when the map is stored.\n\
             host = {}\nboot = {}\npid = {}\nprocess_start = {}\nsince = {}\ntoken = {}\n",
            quoted(&self.host),
            quoted(&self.boot),
            self.pid,
            self.process_start,
            quoted(&self.since),
            quoted(&self.token)
        )
    }

    /// True when the holder ran on this host and its process is gone.
    fn gone_from_this_host(&self) -> bool {
        if self.host != host_name() || self.boot.is_empty() || self.boot != boot_id() {
            return false;
        }
        match process_start(self.pid) {
            None => Path::new("/proc/self/stat").exists(), // no such process (where /proc tells)
            Some(start) => self.process_start != 0 && start != self.process_start,
        }
    }
}

/// A claim found in the store.
#[derive(Debug, Clone, PartialEq)]
pub struct ClaimInfo {
    /// The claim file.
    pub path: PathBuf,
    /// Its holder (`None` while its creator is still writing it, or if it is unreadable).
    pub holder: Option<Holder>,
    /// Time since its last refresh.
    pub age: Duration,
    /// True when it may be taken over.
    pub stale: bool,
}

/// A claim this builder holds: refreshed by a thread until it is released (or dropped),
/// which removes the claim file if it is still this claim.
#[derive(Debug)]
pub struct Claim {
    path: PathBuf,
    token: String,
    stop: Arc<(Mutex<bool>, Condvar)>,
    lost: Arc<AtomicBool>,
    refresher: Option<std::thread::JoinHandle<()>>,
}

/// The outcome of [`Store::claim`].
#[derive(Debug)]
pub enum Attempt {
    /// The map is this builder's to build.
    Taken(Claim),
    /// A live builder holds it.
    Held(ClaimInfo),
}

impl Claim {
    /// The claim file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// True when another builder took the claim over (this one was thought stale).
    pub fn lost(&self) -> bool {
        self.lost.load(Ordering::Relaxed)
    }

    /// Stops refreshing and removes the claim file (if it is still this claim).
    pub fn release(mut self) -> Result<()> {
        self.stop_refresher();
        if read_holder(&self.path).is_some_and(|h| h.token == self.token) {
            match fs::remove_file(&self.path) {
                Err(e) if e.kind() != std::io::ErrorKind::NotFound => {
                    return Err(Error::io(&self.path, e))
                }
                _ => {}
            }
        }
        Ok(())
    }

    fn start(path: PathBuf, token: String, policy: ClaimPolicy) -> Claim {
        let stop = Arc::new((Mutex::new(false), Condvar::new()));
        let lost = Arc::new(AtomicBool::new(false));
        let refresher = {
            let (path, token, stop, lost) = (
                path.clone(),
                token.clone(),
                Arc::clone(&stop),
                Arc::clone(&lost),
            );
            std::thread::spawn(move || refresh_until_stopped(&path, &token, policy, &stop, &lost))
        };
        Claim {
            path,
            token,
            stop,
            lost,
            refresher: Some(refresher),
        }
    }

    fn stop_refresher(&mut self) {
        let (flag, wake) = &*self.stop;
        *flag.lock().unwrap_or_else(|e| e.into_inner()) = true;
        wake.notify_all();
        if let Some(t) = self.refresher.take() {
            let _ = t.join();
        }
    }
}

impl Drop for Claim {
    fn drop(&mut self) {
        if self.refresher.is_some() {
            self.stop_refresher();
            if read_holder(&self.path).is_some_and(|h| h.token == self.token) {
                let _ = fs::remove_file(&self.path);
            }
        }
    }
}

/// The refresher thread: touches the claim every `policy.refresh` while it is still ours.
fn refresh_until_stopped(
    path: &Path,
    token: &str,
    policy: ClaimPolicy,
    stop: &(Mutex<bool>, Condvar),
    lost: &AtomicBool,
) {
    let (flag, wake) = stop;
    let mut stopped = flag.lock().unwrap_or_else(|e| e.into_inner());
    loop {
        let (guard, _) = wake
            .wait_timeout(stopped, policy.refresh)
            .unwrap_or_else(|e| e.into_inner());
        stopped = guard;
        if *stopped {
            return;
        }
        let ours = read_holder(path).is_some_and(|h| h.token == token);
        let touched = ours
            && fs::File::options()
                .write(true)
                .open(path)
                .and_then(|f| f.set_modified(SystemTime::now()))
                .is_ok();
        if !touched {
            lost.store(true, Ordering::Relaxed);
            return;
        }
    }
}

impl Store {
    /// Tries to claim the map file `map_name` (`<hash>.fits`) for building: creates its claim,
    /// or takes over a stale one. A live claim of another builder is left alone.
    ///
    /// ```
    /// use causeway::store::{claim::{Attempt, ClaimPolicy}, Store};
    /// let dir = std::env::temp_dir().join(format!("causeway-doc-claim-{}", std::process::id()));
    /// let store = Store::create(&dir).unwrap();
    /// let name = "0123456789abcdef0123456789abcdef.fits";
    /// let Attempt::Taken(claim) = store.claim(name, ClaimPolicy::default()).unwrap() else {
    ///     panic!("a fresh store has no claims");
    /// };
    /// assert!(matches!(store.claim(name, ClaimPolicy::default()).unwrap(), Attempt::Held(_)));
    /// claim.release().unwrap();
    /// assert!(store.claims(ClaimPolicy::default()).unwrap().is_empty());
    /// std::fs::remove_dir_all(&dir).unwrap();
    /// ```
    pub fn claim(&self, map_name: &str, policy: ClaimPolicy) -> Result<Attempt> {
        let path = self.root.join(claim_name(map_name)?);
        if let Some(claim) = create(&path, policy)? {
            return Ok(Attempt::Taken(claim));
        }
        let Some(info) = inspect(&path, policy) else {
            // Released between our create and our look: try once more.
            return Ok(match create(&path, policy)? {
                Some(claim) => Attempt::Taken(claim),
                None => Attempt::Held(placeholder(path)),
            });
        };
        if !info.stale {
            return Ok(Attempt::Held(info));
        }
        self.with_lock(|| {
            // Under the lock no other builder takes over; look again.
            match inspect(&path, policy) {
                Some(now) if !now.stale => return Ok(Attempt::Held(now)),
                Some(_) => discard(&path)?,
                None => {}
            }
            Ok(match create(&path, policy)? {
                Some(claim) => Attempt::Taken(claim),
                None => Attempt::Held(inspect(&path, policy).unwrap_or(placeholder(path))),
            })
        })
    }

    /// The claim on the map file `map_name`, if any.
    pub fn claim_on(&self, map_name: &str, policy: ClaimPolicy) -> Result<Option<ClaimInfo>> {
        Ok(inspect(&self.root.join(claim_name(map_name)?), policy))
    }

    /// Every claim in the store, sorted by file name.
    pub fn claims(&self, policy: ClaimPolicy) -> Result<Vec<ClaimInfo>> {
        Ok(self
            .own_files(is_claim_name)?
            .into_iter()
            .filter_map(|name| inspect(&self.root.join(name), policy))
            .collect())
    }
}

/// Creates the claim at `path` exclusively; `None` when it exists.
fn create(path: &Path, policy: ClaimPolicy) -> Result<Option<Claim>> {
    let mut file = match fs::File::options().write(true).create_new(true).open(path) {
        Ok(f) => f,
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => return Ok(None),
        Err(e) => return Err(Error::io(path, e)),
    };
    let me = Holder::me();
    if let Err(e) = file
        .write_all(me.text().as_bytes())
        .and_then(|()| file.sync_data())
    {
        let _ = fs::remove_file(path);
        return Err(Error::io(path, e));
    }
    Ok(Some(Claim::start(path.to_path_buf(), me.token, policy)))
}

/// Renames a stale claim to a temporary name and removes it (under the store lock).
fn discard(path: &Path) -> Result<()> {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned());
    let aside = path.with_file_name(format!(
        ".{}.{}.{}.tmp",
        name.unwrap_or_default(),
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    match fs::rename(path, &aside) {
        Ok(()) => fs::remove_file(&aside).map_err(|e| Error::io(&aside, e)),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(Error::io(path, e)),
    }
}

/// The claim at `path` and whether it is stale; `None` when there is none. The file is opened
/// before its modification time is read: on NFS an open revalidates the cached attributes
/// (close-to-open consistency), where a bare `stat` may see them up to a minute old.
fn inspect(path: &Path, policy: ClaimPolicy) -> Option<ClaimInfo> {
    let mut file = fs::File::open(path).ok()?;
    let mut text = String::new();
    let holder = std::io::Read::read_to_string(&mut file, &mut text)
        .ok()
        .and_then(|_| toml::from_str::<Holder>(&text).ok());
    let modified = file.metadata().ok()?.modified().ok()?;
    let age = modified.elapsed().unwrap_or(Duration::ZERO);
    let stale =
        age >= policy.stale_after || holder.as_ref().is_some_and(Holder::gone_from_this_host);
    Some(ClaimInfo {
        path: path.to_path_buf(),
        holder,
        age,
        stale,
    })
}

/// A live claim whose file vanished or appeared under us: reported as held.
fn placeholder(path: PathBuf) -> ClaimInfo {
    ClaimInfo {
        path,
        holder: None,
        age: Duration::ZERO,
        stale: false,
    }
}

fn read_holder(path: &Path) -> Option<Holder> {
    toml::from_str(&fs::read_to_string(path).ok()?).ok()
}

/// This host's name (the kernel's, else `$HOSTNAME`, else `unknown`).
pub fn host_name() -> String {
    fs::read_to_string("/proc/sys/kernel/hostname")
        .ok()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok())
        .unwrap_or_else(|| "unknown".into())
}

fn boot_id() -> String {
    fs::read_to_string("/proc/sys/kernel/random/boot_id")
        .map(|s| s.trim().to_string())
        .unwrap_or_default()
}

/// The start of process `pid` in clock ticks after boot (`/proc/<pid>/stat`, field 22);
/// `None` when there is no such process (or no /proc).
fn process_start(pid: u32) -> Option<u64> {
    let stat = fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    // The command name (field 2) is in parentheses and may hold spaces: count after it.
    let after = &stat[stat.rfind(')')? + 1..];
    after.split_whitespace().nth(19)?.parse().ok()
}
