//! Writing a set of output files safely: all or nothing, never over existing files unless
//! asked.
//!
//! Owns the rule that outputs are written under temporary names in the destination folder
//! and renamed into place only once every one of them is complete, that existing outputs are
//! not overwritten without `--force`, and that a failure part-way leaves no partial output.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// A planned set of output files in one folder.
#[derive(Debug)]
pub struct Outputs {
    dir: PathBuf,
    /// The highest folder this plan created (with every folder below it down to `dir`).
    created_dir: Option<PathBuf>,
    planned: Vec<(PathBuf, PathBuf)>,
    /// Files of an earlier run that this one does not write (removed on commit).
    stale: Vec<PathBuf>,
    /// Every output name this plan knows (its own and an earlier run's), for the temporary
    /// files a killed process left ([`remove_leftovers`]).
    known: Vec<String>,
    committed: bool,
    /// Whether earlier outputs may be replaced (`--force`); without it, files that another
    /// process put in place meanwhile are not replaced either ([`Outputs::commit`]).
    force: bool,
    /// This plan's entry in [`LIVE`].
    id: u64,
}

/// The temporary files and created folders of every plan not yet committed or dropped, for
/// [`remove_partial_outputs_on_interrupt`].
struct Live {
    next: u64,
    plans: Vec<LivePlan>,
}

struct LivePlan {
    id: u64,
    files: Vec<PathBuf>,
    dir: PathBuf,
    created_dir: Option<PathBuf>,
}

static LIVE: std::sync::Mutex<Live> = std::sync::Mutex::new(Live {
    next: 0,
    plans: Vec::new(),
});

/// Makes an interrupt (Ctrl-C, SIGTERM, SIGHUP) remove the temporary files of every output
/// plan not yet committed, and the folders those plans created, before the process ends by
/// that signal (its default action, so a parent sees which signal ended it: a shell reports
/// 128 + its number, 130 for Ctrl-C and 143 for SIGTERM, and stops a loop on Ctrl-C), so that
/// an interrupted run leaves no partial output either. Signals the process was started with
/// set to be ignored (`nohup`, background jobs of a non-interactive shell) stay ignored.
/// Called once, by the binary; the signals are received on a thread of their own.
/// (Elsewhere than on Unix: Ctrl-C only, ending with code 130.)
pub fn remove_partial_outputs_on_interrupt() {
    #[cfg(unix)]
    {
        use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
        let wanted: Vec<i32> = [SIGINT, SIGTERM, SIGHUP]
            .into_iter()
            .filter(|&s| !ignored(s))
            .collect();
        if wanted.is_empty() {
            return;
        }
        let Ok(mut signals) = signal_hook::iterator::Signals::new(&wanted) else {
            return;
        };
        std::thread::spawn(move || {
            if let Some(signal) = signals.forever().next() {
                let _held = clean_up();
                // The signal's default action ends the process; should it not, the shell's
                // code for it.
                let _ = signal_hook::low_level::emulate_default_handler(signal);
                std::process::exit(128 + signal);
            }
        });
    }
    #[cfg(not(unix))]
    let _ = ctrlc::set_handler(|| {
        let _held = clean_up();
        std::process::exit(130)
    });
}

/// Whether `signal` is set to be ignored (as inherited from the parent).
#[cfg(unix)]
fn ignored(signal: i32) -> bool {
    // SAFETY: with a null new action, sigaction only writes the current one into `old`, a
    // plain C struct for which all zeros is a valid value.
    unsafe {
        let mut old: libc::sigaction = std::mem::zeroed();
        libc::sigaction(signal, std::ptr::null(), &mut old) == 0
            && old.sa_sigaction == libc::SIG_IGN
    }
}

/// What an interrupt does before the process ends: removes the unfinished outputs and the
/// folders their plans created, and says so. Returns the lock of the plans, which the caller
/// holds until the process ends.
fn clean_up() -> std::sync::MutexGuard<'static, Live> {
    {
        // The lock is held until the process ends, so no plan starts or commits meanwhile,
        // and no temporary file is created: every one is created under this lock
        // ([`create_file`], [`creating`]), so those that exist now are all there will be.
        let live = LIVE.lock().unwrap_or_else(|e| e.into_inner());
        // This process's temporary files in each plan's folder: the listed ones, and those a
        // writer made under other names of the same patterns (a FITS writer's own temporary).
        let pid = std::process::id();
        let marks = [
            format!(".partial-{pid}-"),
            format!(".cairn-write-probe-{pid}"),
        ];
        for p in &live.plans {
            for f in &p.files {
                let _ = std::fs::remove_file(f);
            }
            if let Ok(entries) = std::fs::read_dir(&p.dir) {
                for e in entries.flatten() {
                    let name = e.file_name().to_string_lossy().into_owned();
                    if marks.iter().any(|m| name.contains(m.as_str())) {
                        let _ = std::fs::remove_file(e.path());
                    }
                }
            }
        }
        for p in &live.plans {
            remove_created(&p.dir, p.created_dir.as_deref());
        }
        if live.plans.is_empty() {
            let _ = std::io::Write::write_all(&mut std::io::stderr(), b"cairn: interrupted.\n");
        } else {
            let _ = std::io::Write::write_all(
                &mut std::io::stderr(),
                b"cairn: interrupted; the unfinished outputs were removed.\n",
            );
        }
        live
    }
}

/// Runs `create`, which makes a temporary output file, under the lock the interrupt handler
/// takes ([`remove_partial_outputs_on_interrupt`]): a file is then either made before an
/// interrupt, and removed by it, or never made. For writers that create their files
/// themselves (CFITSIO); others use [`create_file`].
pub(crate) fn creating<R>(create: impl FnOnce() -> R) -> R {
    let _live = LIVE.lock().unwrap_or_else(|e| e.into_inner());
    create()
}

/// Creates (or truncates) the temporary output file `path` for writing, under the interrupt
/// handler's lock (see [`creating`]).
pub(crate) fn create_file(path: &Path) -> std::io::Result<std::fs::File> {
    creating(|| std::fs::File::create(path))
}

/// Creates the temporary output file `path`, which must not exist yet, for writing and reading
/// (so that it can be mapped), under the interrupt handler's lock (see [`creating`]).
pub(crate) fn create_new_file(path: &Path) -> std::io::Result<std::fs::File> {
    creating(|| {
        std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create_new(true)
            .open(path)
    })
}

/// Refuses, before anything is written, a run whose output `name` in `dir` is one of its own
/// `inputs` (a map kept in the output folder under an output's name would be replaced).
pub fn refuse_inputs_as_outputs(dir: &Path, names: &[String], inputs: &[&Path]) -> Result<()> {
    let inputs: Vec<(PathBuf, &Path)> = inputs
        .iter()
        .filter_map(|p| std::fs::canonicalize(p).ok().map(|c| (c, *p)))
        .collect();
    for name in names {
        let Ok(target) = std::fs::canonicalize(dir.join(name)) else {
            continue;
        };
        if let Some((_, input)) = inputs.iter().find(|(c, _)| *c == target) {
            return Err(Error::usage(format!(
                "{}: is an input of this run and would be replaced by its output {name}; choose another output folder with -o (or rename the input).",
                input.display()
            )));
        }
    }
    Ok(())
}

impl Outputs {
    /// Plans outputs named `names` in `dir` (created if missing). Refuses, before anything is
    /// written, if any already exists and `force` is false.
    pub fn plan(dir: &Path, names: &[String], force: bool) -> Result<Outputs> {
        Self::plan_replacing(dir, names, &[], force)
    }

    /// [`Outputs::plan`], where `others` names the outputs an earlier run of the same command
    /// may have written and this one does not (figures skipped this time, say): they count as
    /// existing outputs, and with `force` they are removed once this run's files are in
    /// place, so that the folder never mixes two runs.
    pub fn plan_replacing(
        dir: &Path,
        names: &[String],
        others: &[String],
        force: bool,
    ) -> Result<Outputs> {
        if dir.exists() && !dir.is_dir() {
            return Err(Error::output(
                dir,
                "exists and is not a folder; choose another output folder with -o.",
            ));
        }
        if dir.to_str().is_none() {
            return Err(Error::output(
                dir,
                "is not a UTF-8 name, which the FITS library cannot open; choose an output folder named in UTF-8 with -o.",
            ));
        }
        // The plan is registered for an interrupt in the same breath as its folders are made
        // (under the lock the interrupt handler takes), so no moment leaves them unknown;
        // from here on, any refusal drops `out`, which removes what it made.
        let mut out = {
            let mut live = LIVE.lock().unwrap_or_else(|e| e.into_inner());
            let mut created_dir = None;
            if dir.symlink_metadata().is_ok() && !dir.exists() {
                return Err(Error::output(
                    dir,
                    "is a symbolic link to a folder that does not exist; create its target or choose another output folder with -o.",
                ));
            }
            if !dir.exists() {
                // The highest missing folder, so that a failure removes every level made here.
                let mut top = dir.to_path_buf();
                while let Some(up) = top.parent() {
                    if up.as_os_str().is_empty() || up.exists() {
                        break;
                    }
                    top = up.to_path_buf();
                }
                std::fs::create_dir_all(dir).map_err(|e| {
                    Error::output(
                        dir,
                        format!(
                            "cannot be created ({e}); choose a writable output folder with -o."
                        ),
                    )
                })?;
                created_dir = Some(top);
            }
            live.next += 1;
            let id = live.next;
            live.plans.push(LivePlan {
                id,
                files: Vec::new(),
                dir: dir.to_path_buf(),
                created_dir: created_dir.clone(),
            });
            Outputs {
                dir: dir.to_path_buf(),
                created_dir,
                planned: Vec::new(),
                stale: Vec::new(),
                known: names.iter().chain(others).cloned().collect(),
                committed: false,
                force,
                id,
            }
        };
        let mut existing = Vec::new();
        for (k, name) in names.iter().enumerate() {
            let target = dir.join(name);
            if target.is_dir() {
                return Err(Error::output(
                    &target,
                    "is a folder where an output file goes; move it away or choose another output folder with -o.",
                ));
            }
            // (A symbolic link counts, even one to nothing: the commit would not replace it.)
            if target.symlink_metadata().is_ok() && !force {
                existing.push(name.clone());
            }
            let tmp = dir.join(format!(".{name}.partial-{}-{k}", std::process::id()));
            out.planned.push((target, tmp));
        }
        for name in others.iter().filter(|n| !names.contains(n)) {
            let target = dir.join(name);
            if target.symlink_metadata().is_ok() {
                if force {
                    out.stale.push(target);
                } else {
                    existing.push(name.clone());
                }
            }
        }
        if !existing.is_empty() {
            return Err(Error::output(
                dir,
                format!(
                    "already holds {} from an earlier run; add --force to replace them or choose another folder with -o.",
                    existing.join(", ")
                ),
            ));
        }
        {
            let mut live = LIVE.lock().unwrap_or_else(|e| e.into_inner());
            if let Some(p) = live.plans.iter_mut().find(|p| p.id == out.id) {
                p.files = out.planned.iter().map(|(_, tmp)| tmp.clone()).collect();
            }
        }
        // Probe that the folder is writable before any real work.
        let probe = dir.join(format!(".cairn-write-probe-{}", std::process::id()));
        create_file(&probe).map_err(|e| {
            Error::output(
                dir,
                format!("is not writable ({e}); choose a writable output folder with -o."),
            )
        })?;
        let _ = std::fs::remove_file(&probe);
        Ok(out)
    }

    /// The output folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The temporary path to write the output `name` to.
    pub fn temp(&self, name: &str) -> PathBuf {
        self.planned
            .iter()
            .find(|(t, _)| t.file_name().map(|f| f == name).unwrap_or(false))
            .map(|(_, tmp)| tmp.clone())
            .unwrap_or_else(|| panic!("output {name} was not planned"))
    }

    /// Drops a planned output that turned out to have nothing to hold.
    /// An earlier run's file of that name (allowed by `force`) is removed on commit.
    pub fn skip(&mut self, name: &str) {
        self.planned
            .retain(|(t, _)| t.file_name().map(|f| f != name).unwrap_or(true));
        // Without --force the name was free when planned: a file there now is another
        // run's, and is left alone.
        let target = self.dir.join(name);
        if self.force && target.is_file() {
            self.stale.push(target);
        }
    }

    /// Renames every temporary file into place. Every planned output must have been written.
    pub fn commit(mut self) -> Result<Vec<PathBuf>> {
        for (target, tmp) in &self.planned {
            if !tmp.exists() {
                return Err(Error::internal(format!(
                    "output {} was planned but not written",
                    target.display()
                )));
            }
        }
        // An interrupt waits for the renames to finish (its handler takes the same lock), so
        // the folder holds either the whole new run or none of it.
        let mut live = LIVE.lock().unwrap_or_else(|e| e.into_inner());
        let mut done: Vec<PathBuf> = Vec::new();
        for (target, tmp) in &self.planned {
            let put = if self.force {
                std::fs::rename(tmp, target)
            } else {
                place_new(tmp, target)
            };
            if let Err(e) = put {
                // Without --force, what this commit put in place is new: taken back, so that
                // the folder keeps no part of this run.
                if !self.force {
                    for t in &done {
                        let _ = std::fs::remove_file(t);
                    }
                }
                return Err(if e.kind() == std::io::ErrorKind::AlreadyExists {
                    Error::output(
                        target,
                        "appeared while this run was working (another run writing to the same folder?) and is not replaced; nothing of this run was kept: run again with another -o, or add --force to replace it.",
                    )
                } else {
                    Error::output(
                        target,
                        format!("cannot be put in place ({e}); free that name and run again."),
                    )
                });
            }
            done.push(target.clone());
        }
        for old in &self.stale {
            std::fs::remove_file(old).map_err(|e| {
                Error::output(
                    old,
                    format!("is left from an earlier run and cannot be removed ({e}); remove it by hand."),
                )
            })?;
        }
        self.committed = true;
        live.plans.retain(|p| p.id != self.id);
        remove_leftovers(&self.dir, &self.known);
        Ok(done)
    }
}

/// Puts the finished file `tmp` in place as `target` unless `target` exists, also when another
/// process creates it at the same moment: a hard link, which the file system refuses to make
/// over an existing name, then the temporary name removed. Where hard links cannot be made
/// (some network or foreign file systems), the name is checked and the file renamed.
fn place_new(tmp: &Path, target: &Path) -> std::io::Result<()> {
    match std::fs::hard_link(tmp, target) {
        Ok(()) => {
            // A temporary name left by a failure here is removed by a later run
            // ([`remove_leftovers`]).
            let _ = std::fs::remove_file(tmp);
            Ok(())
        }
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Err(e),
        Err(_) if target.symlink_metadata().is_ok() => {
            Err(std::io::Error::from(std::io::ErrorKind::AlreadyExists))
        }
        Err(_) => std::fs::rename(tmp, target),
    }
}

/// Removes the temporary files that a cairn process killed outright (out of memory,
/// `kill -9`: no handler runs) left in `dir`: hidden files named after one of cairn's outputs
/// `names`, `.NAME.partial-PID-K` or a FITS writer's `..NAME.partial-PID-K.part-PID`, whose
/// process no longer runs. Files of a running process, or of any other name, are left.
fn remove_leftovers(dir: &Path, names: &[String]) {
    #[cfg(unix)]
    {
        let Ok(entries) = std::fs::read_dir(dir) else {
            return;
        };
        let me = std::process::id();
        for e in entries.flatten() {
            let file = e.file_name();
            let Some(rest) = file.to_str().and_then(|f| f.strip_prefix('.')) else {
                continue;
            };
            let rest = rest.strip_prefix('.').unwrap_or(rest);
            let Some(after) = names
                .iter()
                .find_map(|n| rest.strip_prefix(n.as_str())?.strip_prefix(".partial-"))
            else {
                continue;
            };
            let Some(pid) = after.split('-').next().and_then(|p| p.parse::<u32>().ok()) else {
                continue;
            };
            if pid != me && !process_runs(pid) {
                let _ = std::fs::remove_file(e.path());
            }
        }
    }
    #[cfg(not(unix))]
    let _ = (dir, names);
}

/// Whether a process `pid` exists (signal 0 checks without sending anything; a process of
/// another user answers "not permitted").
#[cfg(unix)]
fn process_runs(pid: u32) -> bool {
    let Ok(p) = i32::try_from(pid) else {
        return false;
    };
    // SAFETY: kill with signal 0 only checks that the process exists; no signal is sent.
    let answered = unsafe { libc::kill(p, 0) };
    answered == 0 || std::io::Error::last_os_error().raw_os_error() == Some(libc::EPERM)
}

impl Drop for Outputs {
    fn drop(&mut self) {
        if self.committed {
            return;
        }
        // Under the lock, so that an interrupt meanwhile finds the plan either whole or gone.
        let mut live = LIVE.lock().unwrap_or_else(|e| e.into_inner());
        for (_, tmp) in &self.planned {
            let _ = std::fs::remove_file(tmp);
        }
        remove_created(&self.dir, self.created_dir.as_deref());
        live.plans.retain(|p| p.id != self.id);
    }
}

/// Removes the empty folders from `dir` up to `top` (those a plan created), if any.
fn remove_created(dir: &Path, top: Option<&Path>) {
    let Some(top) = top else { return };
    let mut d = dir;
    loop {
        if std::fs::remove_dir(d).is_err() || d == top {
            return;
        }
        match d.parent() {
            Some(up) => d = up,
            None => return,
        }
    }
}

/// Writes `bytes` to `path` (used for the temporary files of an [`Outputs`]).
pub fn write_bytes(path: &Path, bytes: &[u8]) -> Result<()> {
    use std::io::Write;
    create_file(path)
        .and_then(|mut f| f.write_all(bytes))
        .map_err(|e| Error::output(path, format!("cannot be written ({e}).")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_or_nothing_and_no_overwrite_without_force() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("run");
        let names = vec!["a.csv".to_string(), "b.json".to_string()];
        let o = Outputs::plan(&out, &names, false).unwrap();
        write_bytes(&o.temp("a.csv"), b"1").unwrap();
        drop(o); // failure part-way: nothing left, folder removed
        assert!(!out.exists());
        let o = Outputs::plan(&out, &names, false).unwrap();
        write_bytes(&o.temp("a.csv"), b"1").unwrap();
        write_bytes(&o.temp("b.json"), b"2").unwrap();
        o.commit().unwrap();
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"1");
        let e = Outputs::plan(&out, &names, false).unwrap_err();
        assert!(
            e.message.contains("--force") && e.message.contains("a.csv, b.json"),
            "{e}"
        );
        let o = Outputs::plan(&out, &names, true).unwrap();
        write_bytes(&o.temp("a.csv"), b"3").unwrap();
        write_bytes(&o.temp("b.json"), b"4").unwrap();
        o.commit().unwrap();
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"3");
        let listing: Vec<_> = std::fs::read_dir(&out).unwrap().collect();
        assert_eq!(listing.len(), 2, "no temporary files left");
    }

    /// Two runs into one folder at once: the run that commits second finds an output the
    /// first put in place after it planned, and without --force neither replaces it nor keeps
    /// any file of its own; with --force it replaces it.
    #[test]
    fn a_file_put_in_place_meanwhile_is_not_replaced_without_force() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("run");
        let names = vec!["a.csv".to_string(), "b.json".to_string()];
        let o = Outputs::plan(&out, &names, false).unwrap();
        write_bytes(&o.temp("a.csv"), b"mine").unwrap();
        write_bytes(&o.temp("b.json"), b"mine").unwrap();
        // The other run's file, put in place after this plan was made.
        std::fs::write(out.join("b.json"), b"theirs").unwrap();
        let e = o.commit().unwrap_err();
        assert!(
            e.message.contains("appeared while this run was working"),
            "{e}"
        );
        assert_eq!(std::fs::read(out.join("b.json")).unwrap(), b"theirs");
        let mut listing: Vec<String> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        listing.sort();
        assert_eq!(
            listing,
            ["b.json"],
            "nothing of this run kept, no temporary file"
        );
        let o = Outputs::plan(&out, &names, true).unwrap();
        write_bytes(&o.temp("a.csv"), b"mine").unwrap();
        write_bytes(&o.temp("b.json"), b"mine").unwrap();
        o.commit().unwrap();
        assert_eq!(std::fs::read(out.join("b.json")).unwrap(), b"mine");
    }

    /// A symbolic link at an output's name, even one to nothing, is an existing output,
    /// refused before any work without --force; an output skipped without --force leaves a
    /// file another run put at its name.
    #[cfg(unix)]
    #[test]
    fn links_and_skipped_names_are_not_replaced_without_force() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("run");
        std::fs::create_dir(&out).unwrap();
        std::os::unix::fs::symlink("nowhere", out.join("a.csv")).unwrap();
        let names = vec!["a.csv".to_string(), "b.json".to_string()];
        let e = Outputs::plan(&out, &names, false).unwrap_err();
        assert!(e.message.contains("already holds a.csv"), "{e}");
        std::fs::remove_file(out.join("a.csv")).unwrap();
        let mut o = Outputs::plan(&out, &names, false).unwrap();
        write_bytes(&o.temp("a.csv"), b"mine").unwrap();
        std::fs::write(out.join("b.json"), b"theirs").unwrap();
        o.skip("b.json");
        o.commit().unwrap();
        assert_eq!(std::fs::read(out.join("b.json")).unwrap(), b"theirs");
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"mine");
    }
}
