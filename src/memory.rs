//! How much more memory this process may take, so that work which cannot fit is refused with
//! a sentence before it starts, rather than ended by a failed allocation (which aborts the
//! process, leaving no message a user can act on and the temporary files of its outputs) or
//! by the kernel's out-of-memory killer.
//!
//! Three limits are read, each where the system has it (Linux; elsewhere none is known and
//! nothing is refused):
//! * the address-space limit (`RLIMIT_AS`, what `ulimit -v` sets on shared login nodes),
//!   less the process's present virtual size (`VmSize` of `/proc/self/status`);
//! * the memory the kernel can still hand out: `MemAvailable` plus `SwapFree` of
//!   `/proc/meminfo`;
//! * the control group's limit (cgroup v2 `memory.max` less `memory.current`, as batch
//!   schedulers set per job).
//!
//! The needs themselves are measured, not derived: see [`crate::segment::memory_needed`].

/// Room left under one limit, in bytes, and which limit it is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Room {
    pub bytes: u64,
    pub limit: Limit,
}

/// The kinds of limit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Limit {
    /// The address-space limit (`ulimit -v`): counts virtual memory.
    AddressSpace,
    /// The machine's available memory and swap: counts resident memory.
    Machine,
    /// The control group's memory limit: counts resident memory.
    ControlGroup,
}

impl Limit {
    /// How the limit is named to a user.
    pub fn describe(self) -> &'static str {
        match self {
            Limit::AddressSpace => "the address-space limit of this shell (ulimit -v)",
            Limit::Machine => "the memory and swap this machine has free",
            Limit::ControlGroup => "the memory limit of this job's control group",
        }
    }
}

/// Room under the address-space limit, if there is one.
pub fn address_space_room() -> Option<Room> {
    #[cfg(target_os = "linux")]
    {
        let mut r = libc::rlimit {
            rlim_cur: 0,
            rlim_max: 0,
        };
        // SAFETY: getrlimit writes the struct it is given and reads nothing else.
        if unsafe { libc::getrlimit(libc::RLIMIT_AS, &mut r) } != 0
            || r.rlim_cur == libc::RLIM_INFINITY
        {
            return None;
        }
        let used = status_kb("VmSize:")? * 1024;
        // `rlim_t` is 32 bits wide on some targets.
        #[allow(clippy::unnecessary_cast)]
        Some(Room {
            bytes: (r.rlim_cur as u64).saturating_sub(used),
            limit: Limit::AddressSpace,
        })
    }
    #[cfg(not(target_os = "linux"))]
    {
        None
    }
}

/// Room for resident memory: the smaller of the machine's available memory and swap and the
/// control group's room, where known.
pub fn resident_room() -> Option<Room> {
    let machine = meminfo_kb("MemAvailable:").map(|a| Room {
        bytes: (a + meminfo_kb("SwapFree:").unwrap_or(0)) * 1024,
        limit: Limit::Machine,
    });
    let group = cgroup_room().map(|bytes| Room {
        bytes,
        limit: Limit::ControlGroup,
    });
    match (machine, group) {
        (Some(m), Some(g)) => Some(if g.bytes < m.bytes { g } else { m }),
        (m, g) => m.or(g),
    }
}

/// A `kB` figure of a `/proc` file's line starting with `key`.
fn kb_of(text: &str, key: &str) -> Option<u64> {
    text.lines()
        .find(|l| l.starts_with(key))?
        .split_whitespace()
        .nth(1)?
        .parse()
        .ok()
}

fn status_kb(key: &str) -> Option<u64> {
    kb_of(&std::fs::read_to_string("/proc/self/status").ok()?, key)
}

fn meminfo_kb(key: &str) -> Option<u64> {
    kb_of(&std::fs::read_to_string("/proc/meminfo").ok()?, key)
}

/// Room under the cgroup v2 memory limits of this process's group and of the groups above it
/// (a batch system may set the limit on a parent), the least of them, if any has one. A
/// group's usage (`memory.current`) counts the file cache, which the kernel reclaims before
/// it refuses memory: its inactive part (`inactive_file` of `memory.stat`) is taken as room.
/// Control groups of version 1 are not read.
fn cgroup_room() -> Option<u64> {
    let cg = std::fs::read_to_string("/proc/self/cgroup").ok()?;
    // The unified hierarchy's line is `0::/path`.
    let rel = cg.lines().find_map(|l| l.strip_prefix("0::"))?;
    let root = std::path::Path::new("/sys/fs/cgroup");
    let mut dir = root.join(rel.trim_start_matches('/'));
    let mut least: Option<u64> = None;
    loop {
        if let Some(room) = group_room(&dir) {
            least = Some(least.map_or(room, |l| l.min(room)));
        }
        if dir == root || !dir.pop() || !dir.starts_with(root) {
            break;
        }
    }
    least
}

/// Room under one group's limit: `memory.max` less `memory.current`, plus its inactive file
/// cache; None where it has no limit ("max") or the files cannot be read.
fn group_room(dir: &std::path::Path) -> Option<u64> {
    let read = |f: &str| std::fs::read_to_string(dir.join(f)).ok();
    let max: u64 = read("memory.max")?.trim().parse().ok()?; // "max" does not parse
    let current: u64 = read("memory.current")?.trim().parse().ok()?;
    let inactive_file = read("memory.stat")
        .and_then(|t| {
            t.lines()
                .find_map(|l| l.strip_prefix("inactive_file "))
                .and_then(|v| v.trim().parse::<u64>().ok())
        })
        .unwrap_or(0);
    Some(max.saturating_sub(current.saturating_sub(inactive_file)))
}

/// Gigabytes or megabytes with two or three significant digits, for messages.
pub fn describe_bytes(b: u64) -> String {
    let b = b as f64;
    if b >= 1e9 {
        format!("{:.1} GB", b / 1e9)
    } else {
        format!("{:.0} MB", (b / 1e6).max(1.0))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn proc_figures_are_read_by_key() {
        let text = "VmPeak:\t  640228 kB\nVmSize:\t  123 kB\n";
        assert_eq!(kb_of(text, "VmSize:"), Some(123));
        assert_eq!(kb_of(text, "VmHWM:"), None);
    }

    #[test]
    fn byte_counts_read_in_round_units() {
        assert_eq!(describe_bytes(2_345_000_000), "2.3 GB");
        assert_eq!(describe_bytes(345_600_000), "346 MB");
        assert_eq!(describe_bytes(10), "1 MB");
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn this_machine_reports_its_resident_room() {
        // Every Linux kernel since 3.14 has MemAvailable; a control group's room may be the
        // smaller, and may be nothing in a group at its limit.
        let r = resident_room().expect("MemAvailable is read");
        let machine = meminfo_kb("MemAvailable:").unwrap() * 1024;
        assert!(
            r.limit == Limit::ControlGroup || r.bytes >= machine,
            "{r:?}"
        );
    }
}
