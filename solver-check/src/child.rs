//! A solver as a child process: started in its own process group, confined
//! (see [`crate::confine`]), stopped at its time limit, and, when it ends,
//! every process it left behind stopped too: those of its group, those that
//! carry its run's token in their environment, and (when loadloom is a child
//! subreaper) every orphan handed to loadloom, even one that called `setsid`.

use crate::confine::Sandbox;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// The environment variable that marks every process of one solver run.
pub const RUN_TOKEN: &str = "LOADLOOM_SOLVER_RUN";

/// Makes this process a child subreaper (Linux): orphaned descendants of
/// its children are handed to it instead of to init, so none escapes being
/// stopped. The flag is per process; call it only in a program that runs
/// solvers one after another (the command line does), since
/// [`stop_descendants`] then stops every orphan handed to it.
pub fn become_subreaper() -> bool {
    #[cfg(target_os = "linux")]
    {
        // SAFETY: prctl(PR_SET_CHILD_SUBREAPER, 1) only sets a flag of this process.
        unsafe { libc::prctl(libc::PR_SET_CHILD_SUBREAPER, 1, 0, 0, 0) == 0 }
    }
    #[cfg(not(target_os = "linux"))]
    false
}

fn is_subreaper() -> bool {
    #[cfg(target_os = "linux")]
    {
        let mut flag: libc::c_int = 0;
        // SAFETY: PR_GET_CHILD_SUBREAPER writes one int to the pointer given.
        let ok = unsafe {
            libc::prctl(
                libc::PR_GET_CHILD_SUBREAPER,
                &mut flag as *mut libc::c_int,
                0,
                0,
                0,
            )
        };
        ok == 0 && flag != 0
    }
    #[cfg(not(target_os = "linux"))]
    false
}

/// One process as /proc tells it.
struct Proc {
    pid: i32,
    ppid: i32,
    pgrp: i32,
    zombie: bool,
}

fn processes() -> Vec<Proc> {
    let Ok(dir) = std::fs::read_dir("/proc") else {
        return Vec::new();
    };
    dir.filter_map(|e| e.ok()?.file_name().to_str()?.parse::<i32>().ok())
        .filter_map(|pid| {
            let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
            // The command name may hold spaces and parentheses: fields
            // follow the last ')'.
            let rest = &stat[stat.rfind(')')? + 2..];
            let f: Vec<&str> = rest.split(' ').collect();
            Some(Proc {
                pid,
                zombie: f.first() == Some(&"Z"),
                ppid: f.get(1)?.parse().ok()?,
                pgrp: f.get(2)?.parse().ok()?,
            })
        })
        .collect()
}

fn carries_token(pid: i32, token: &str) -> bool {
    let needle = format!("{RUN_TOKEN}={token}");
    std::fs::read(format!("/proc/{pid}/environ"))
        .map(|env| env.split(|b| *b == 0).any(|v| v == needle.as_bytes()))
        .unwrap_or(false)
}

/// Stops every process left by the solver run: its process group `pgid`,
/// every process carrying `token`, and with the subreaper flag every child
/// of ours not in `before`. Reaps the ones that are our children. Rounds
/// repeat until none is left, since a stopped process's own children are
/// handed on. Returns how many processes were stopped.
pub fn stop_descendants(pgid: i32, token: &str, before: &[i32]) -> usize {
    let me = std::process::id() as i32;
    let adopt = is_subreaper();
    let mut stopped = 0;
    for _ in 0..200 {
        let mut found = false;
        for p in processes() {
            if p.pid == me || p.pid <= 1 {
                continue;
            }
            let ours = p.ppid == me && adopt && !before.contains(&p.pid);
            let target = p.pgrp == pgid || ours || carries_token(p.pid, token);
            if target && !p.zombie {
                // SAFETY: kill(2) of one process id > 1 found above.
                unsafe { libc::kill(p.pid, libc::SIGKILL) };
                stopped += 1;
                found = true;
            }
            if p.ppid == me && (target || adopt) && !before.contains(&p.pid) {
                // SAFETY: waitpid(2) on a child of ours, without blocking.
                unsafe { libc::waitpid(p.pid, std::ptr::null_mut(), libc::WNOHANG) };
            }
        }
        if !found {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    stopped
}

fn our_children() -> Vec<i32> {
    let me = std::process::id() as i32;
    processes()
        .into_iter()
        .filter(|p| p.ppid == me)
        .map(|p| p.pid)
        .collect()
}

/// How a child run ended.
pub enum Ended {
    /// It ended by itself, with this status.
    Exited(std::process::ExitStatus),
    /// It ran past its time limit and was stopped.
    TimedOut,
    /// Its output passed [`LOG_LIMIT`] and it was stopped.
    Flooded,
}

/// The most a child may write to its log (stdout and stderr together): a
/// log is for reading, and a child printing without end would fill the disk.
/// Checked at every poll, so a fast writer overshoots by what it writes in
/// 10 ms at most.
pub const LOG_LIMIT: u64 = 64 << 20;

/// Runs `args` confined by `sandbox`, stdout and stderr to `log` (already
/// open), with `env` added; stops it at `timeout` or when its log passes
/// [`LOG_LIMIT`], then stops everything it left behind. Err is a failure to start it: a line of the solver's failure
/// report (`Failure::Spawn`), not an error of the command, so a `String`.
pub fn run(
    args: &[String],
    env: &[(&str, &Path)],
    log: std::fs::File,
    sandbox: &Sandbox,
    timeout: Duration,
) -> Result<(Ended, usize), String> {
    let err = log.try_clone().map_err(|e| e.to_string())?;
    let watched = log.try_clone().map_err(|e| e.to_string())?;
    let token = format!(
        "{}-{}",
        std::process::id(),
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map(|d| d.as_nanos())
            .unwrap_or(0)
    );
    let mut cmd = Command::new(&args[0]);
    cmd.args(&args[1..])
        .stdin(Stdio::null())
        .stdout(log)
        .stderr(err)
        .env(RUN_TOKEN, &token);
    for (k, v) in env {
        cmd.env(k, v);
    }
    #[cfg(unix)]
    {
        use std::os::unix::process::CommandExt;
        // Its own process group, so a time-out stops its children too.
        cmd.process_group(0);
        #[cfg(target_os = "linux")]
        // SAFETY: one prctl(2) between fork and exec: the child dies with
        // the thread that started it, so a killed loadloom leaves no solver.
        unsafe {
            cmd.pre_exec(|| {
                libc::prctl(libc::PR_SET_PDEATHSIG, libc::SIGKILL, 0, 0, 0);
                Ok(())
            });
        }
    }
    sandbox.apply(&mut cmd);
    let before = our_children();
    let mut child = cmd.spawn().map_err(|e| format!("{}: {e}", args[0]))?;
    let pgid = child.id() as i32;
    let started = Instant::now();
    let ended = loop {
        match child.try_wait() {
            Ok(Some(status)) => break Ended::Exited(status),
            Ok(None) if started.elapsed() >= timeout => {
                let _ = child.kill();
                let _ = child.wait();
                break Ended::TimedOut;
            }
            Ok(None) if watched.metadata().is_ok_and(|m| m.len() > LOG_LIMIT) => {
                let _ = child.kill();
                let _ = child.wait();
                break Ended::Flooded;
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(10)),
            Err(e) => {
                let _ = child.kill();
                let _ = child.wait();
                stop_descendants(pgid, &token, &before);
                return Err(e.to_string());
            }
        }
    };
    Ok((ended, stop_descendants(pgid, &token, &before)))
}
