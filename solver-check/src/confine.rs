//! Confinement of a solver process with Landlock (Linux): it may read its
//! task folder, the system's programs and libraries and its own program
//! files, and write only its estimate folder (with the scratch folder in
//! it). The test truth lies outside all of these, so a solver can neither
//! read nor change it. Where the kernel lacks Landlock the solver runs
//! anyway and every report says "not confined".

use std::path::{Path, PathBuf};
use std::process::Command;

/// Folders of the system a program needs to start and load its libraries.
/// Whole-device files such as /dev/sda are left out on purpose: read as
/// root they would bypass every path rule.
const SYSTEM_READ: [&str; 17] = [
    "/usr",
    "/lib",
    "/lib32",
    "/lib64",
    "/libx32",
    "/bin",
    "/sbin",
    "/etc",
    "/opt",
    "/nix",
    "/proc",
    "/sys",
    "/dev/null",
    "/dev/zero",
    "/dev/random",
    "/dev/urandom",
    "/dev/shm",
];

/// Device files a program may write (output thrown away, shared memory).
const SYSTEM_WRITE: [&str; 3] = ["/dev/null", "/dev/shm", "/dev/tty"];

/// What a solver may touch.
#[derive(Clone, Debug, Default)]
pub struct Access {
    /// Readable (and executable) hierarchies.
    pub read: Vec<PathBuf>,
    /// Writable (and readable) hierarchies.
    pub write: Vec<PathBuf>,
}

/// A confinement ready to be applied to a child process, or the reason
/// there is none.
pub struct Sandbox {
    #[cfg(target_os = "linux")]
    fd: Option<std::os::fd::OwnedFd>,
    /// One line for reports and logs: "confined by Landlock (ABI 7): …" or
    /// "not confined: …".
    pub status: String,
    /// Whether the rules will be enforced.
    pub confined: bool,
}

/// The Landlock ABI version the kernel offers (0 without Landlock).
pub fn landlock_abi() -> i64 {
    #[cfg(target_os = "linux")]
    {
        // SAFETY: landlock_create_ruleset(NULL, 0, VERSION) only returns
        // the ABI version (or -1); it takes no memory from us.
        let v = unsafe {
            libc::syscall(
                libc::SYS_landlock_create_ruleset,
                std::ptr::null::<u8>(),
                0usize,
                1u32,
            )
        };
        v.max(0)
    }
    #[cfg(not(target_os = "linux"))]
    0
}

/// True when `outer` is `inner` or one of its ancestors (both made absolute).
pub fn contains(outer: &Path, inner: &Path) -> bool {
    let abs = |p: &Path| std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
    abs(inner).starts_with(abs(outer))
}

/// The read access a command needs for itself: each word naming an existing
/// file (its script, say, or the part after `=` of `--model=FILE`), and for
/// the program the install prefix (a virtual environment's folder, the
/// interpreter's own) when it sits in a `bin` folder.
pub fn program_paths(argv: &[String]) -> Vec<PathBuf> {
    let mut out = Vec::new();
    if let Some(exe) = argv.first().and_then(|p| which(p)) {
        for p in [exe.clone(), std::fs::canonicalize(&exe).unwrap_or(exe)] {
            let prefix = p
                .parent()
                .filter(|b| b.ends_with("bin"))
                .and_then(Path::parent);
            out.push(prefix.map(Path::to_path_buf).unwrap_or(p));
        }
    }
    for w in argv.iter().skip(1) {
        let w = w.rsplit_once('=').map_or(w.as_str(), |(_, v)| v);
        let p = Path::new(w);
        if p.is_file() {
            out.push(std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf()));
        }
    }
    out
}

/// Resolves a program name the way the shell would (PATH), or a path as is.
fn which(prog: &str) -> Option<PathBuf> {
    if prog.contains('/') {
        let p = PathBuf::from(prog);
        return p.exists().then(|| std::path::absolute(&p).unwrap_or(p));
    }
    std::env::var_os("PATH").and_then(|paths| {
        std::env::split_paths(&paths)
            .map(|d| d.join(prog))
            .find(|p| p.is_file())
    })
}

impl Sandbox {
    /// Builds the rules for `access`, keeping out every path that holds one
    /// of `protect` (the folders of the truth). `enabled` false (or a
    /// kernel without Landlock) gives an unconfined sandbox that says so.
    pub fn new(access: &Access, protect: &[&Path], enabled: bool) -> Sandbox {
        let keep = |p: &&PathBuf| p.exists() && !protect.iter().any(|x| contains(p, x));
        let mut read: Vec<PathBuf> = SYSTEM_READ.iter().map(PathBuf::from).collect();
        read.extend(access.read.iter().cloned());
        let read: Vec<PathBuf> = read.iter().filter(keep).cloned().collect();
        let mut write: Vec<PathBuf> = SYSTEM_WRITE.iter().map(PathBuf::from).collect();
        write.extend(access.write.iter().cloned());
        let write: Vec<PathBuf> = write.iter().filter(keep).cloned().collect();
        if !enabled {
            return Sandbox::none(
                "not confined: confinement was turned off (LOADLOOM_CONFINE=off)",
            );
        }
        Sandbox::build(&read, &write)
    }

    fn none(why: &str) -> Sandbox {
        Sandbox {
            #[cfg(target_os = "linux")]
            fd: None,
            status: why.to_string(),
            confined: false,
        }
    }

    #[cfg(not(target_os = "linux"))]
    fn build(_read: &[PathBuf], _write: &[PathBuf]) -> Sandbox {
        Sandbox::none("not confined: Landlock exists on Linux only")
    }

    #[cfg(target_os = "linux")]
    fn build(read: &[PathBuf], write: &[PathBuf]) -> Sandbox {
        use landlock::{
            path_beneath_rules, Access as _, AccessFs, CompatLevel, Compatible, Ruleset,
            RulesetAttr, RulesetCreatedAttr, ABI,
        };
        let abi = landlock_abi();
        if abi == 0 {
            return Sandbox::none("not confined: this kernel offers no Landlock");
        }
        // ABI 1 covers every file access we restrict; later ABIs add
        // refer (rename across folders) and truncate, taken where offered.
        let target = ABI::V3;
        let made = Ruleset::default()
            .set_compatibility(CompatLevel::BestEffort)
            .handle_access(AccessFs::from_all(target))
            .and_then(|r| r.create())
            .and_then(|r| r.add_rules(path_beneath_rules(read, AccessFs::from_read(target))))
            .and_then(|r| r.add_rules(path_beneath_rules(write, AccessFs::from_all(target))));
        match made {
            Ok(r) => {
                let fd: Option<std::os::fd::OwnedFd> = r.into();
                match fd {
                    Some(fd) => Sandbox {
                        fd: Some(fd),
                        status: format!("confined by Landlock (ABI {abi}): reads its task folder, its program and the system's libraries; writes only its estimate folder"),
                        confined: true,
                    },
                    None => Sandbox::none("not confined: this kernel offers no Landlock"),
                }
            }
            Err(e) => Sandbox::none(&format!(
                "not confined: the Landlock rules could not be made ({e})"
            )),
        }
    }

    /// Makes `cmd`'s process take the rules before it starts its program.
    pub fn apply(&self, cmd: &mut Command) {
        #[cfg(target_os = "linux")]
        if let Some(fd) = &self.fd {
            use std::os::fd::AsRawFd;
            use std::os::unix::process::CommandExt;
            let raw = fd.as_raw_fd();
            // SAFETY: between fork and exec only async-signal-safe calls:
            // two prctl(2) and one landlock_restrict_self(2) on a ruleset
            // descriptor made before the fork; nothing allocates.
            unsafe {
                cmd.pre_exec(move || {
                    if libc::prctl(libc::PR_SET_NO_NEW_PRIVS, 1, 0, 0, 0) != 0
                        || libc::syscall(libc::SYS_landlock_restrict_self, raw, 0u32) != 0
                    {
                        return Err(std::io::Error::last_os_error());
                    }
                    Ok(())
                });
            }
        }
        #[cfg(not(target_os = "linux"))]
        let _ = cmd;
    }
}
