//! Typesetting under a budget. typst cannot be interrupted, so the PDF is typeset in a child process: the
//! tailpack binary itself, started with the hidden `typeset-child` subcommand, reads the prepared file
//! set (a [`Job`]: templates, generated data and charts, extra fonts, date, pack id) on stdin and writes
//! the PDF, or the template error, on stdout. The parent stops the child when it runs longer than
//! `report.typeset_seconds`; the child caps its own memory at `report.typeset_memory_mb` (`RLIMIT_DATA`:
//! heap and anonymous mappings) before it reads anything, and dies with its parent. A breach becomes a
//! [`Error::Template`] (exit 2) naming the template and the limit.
//!
//! A library caller that is not the tailpack binary (a test calling the library in-process) has no
//! child to start and typesets in-process, without the budget: only the binary, which answers the hidden
//! subcommand, says so at start ([`this_binary_serves`]). Either way the same code typesets
//! ([`super::pdf::typeset_here`]), so the PDF bytes do not depend on where it ran.
//!
//! May touch: the child process and its pipes. Reads and writes no file.

use super::pdf::{Job, typeset_here};
use super::world::{Origin, WorldFile};
use crate::error::{Error, Result};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

/// The limits of one typesetting run, and what a breach message names.
#[derive(Debug, Clone)]
pub struct Budget {
    /// Wall-clock seconds before the typesetter is stopped.
    pub seconds: u64,
    /// Megabytes the typesetter may allocate.
    pub memory_mb: u64,
    /// The config file whose `report:` section sets the limits.
    pub config: PathBuf,
    /// The template a breach is blamed on: the custom folder, or the built-in `main.typ`.
    pub template: String,
}

/// The hidden subcommand that runs the child.
pub const SUBCOMMAND: &str = "typeset-child";

/// Set by the tailpack binary at start: this process can be started again as the typesetter.
static SERVES: AtomicBool = AtomicBool::new(false);

/// Called by the tailpack binary before it runs a command: this executable answers [`SUBCOMMAND`], so
/// typesetting may run in a child under the budget. Library callers that do not call it typeset
/// in-process.
pub fn this_binary_serves() {
    SERVES.store(true, Ordering::Relaxed);
}

/// Typesets `job` in a child process under `budget`, or in-process when this process is not the
/// tailpack binary.
pub fn run(job: Job, budget: &Budget) -> Result<Vec<u8>> {
    match typesetter() {
        Some(exe) => in_child(&exe, &job, budget),
        None => typeset_here(job),
    }
}

/// The binary to start as the typesetter: this one, when it is tailpack.
fn typesetter() -> Option<PathBuf> {
    if !SERVES.load(Ordering::Relaxed) {
        return None;
    }
    // The running image itself, even if the file on disk was replaced or removed since it started.
    let own = Path::new("/proc/self/exe");
    if own.exists() {
        return Some(own.to_path_buf());
    }
    std::env::current_exe().ok()
}

/// Starts the child, feeds it the job, waits at most the time budget and reads its answer.
fn in_child(exe: &Path, job: &Job, budget: &Budget) -> Result<Vec<u8>> {
    let mut child = Command::new(exe)
        .arg(SUBCOMMAND)
        .arg("--memory-mb")
        .arg(budget.memory_mb.to_string())
        .arg("--seconds")
        .arg(budget.seconds.to_string())
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .map_err(|e| failed(exe, format!("cannot be started: {e}")))?;
    let input = encode(job);
    let mut stdin = child.stdin.take().expect("piped stdin");
    // A child that dies early closes the pipe; its exit status says why, so the write error is moot.
    let writer = std::thread::spawn(move || stdin.write_all(&input));
    let stdout = drain(child.stdout.take().expect("piped stdout"));
    let stderr = drain(child.stderr.take().expect("piped stderr"));
    let ended = wait(&mut child, Duration::from_secs(budget.seconds))
        .map_err(|e| failed(exe, format!("cannot be waited for: {e}")));
    let _ = writer.join();
    let out = stdout.join().unwrap_or_default();
    let err = String::from_utf8_lossy(&stderr.join().unwrap_or_default()).into_owned();
    answer(ended?, (&out, &err), budget, exe)
}

/// A typesetter failure that is not the templates' fault.
fn failed(exe: &Path, message: String) -> Error {
    Error::Typesetter {
        program: Some(exe.to_path_buf()),
        message,
    }
}

/// Reads a pipe to its end on a thread of its own (so neither pipe can fill up and stall the child).
fn drain(mut pipe: impl Read + Send + 'static) -> std::thread::JoinHandle<Vec<u8>> {
    std::thread::spawn(move || {
        let mut buf = Vec::new();
        let _ = pipe.read_to_end(&mut buf);
        buf
    })
}

/// Waits for the child to end, or until `limit` has passed and then kills it.
fn wait(child: &mut Child, limit: Duration) -> std::io::Result<Ended> {
    let start = Instant::now();
    let mut pause = Duration::from_millis(1);
    loop {
        if let Some(status) = child.try_wait()? {
            return Ok(Ended::Exited(status));
        }
        if start.elapsed() >= limit {
            let _ = child.kill();
            let _ = child.wait();
            return Ok(Ended::TimedOut);
        }
        std::thread::sleep(pause);
        pause = (pause * 2).min(Duration::from_millis(25));
    }
}

/// How the child ended.
enum Ended {
    Exited(ExitStatus),
    TimedOut,
}

/// The PDF, or the error the child's end means; `out` and `err` are what the child printed.
fn answer(ended: Ended, (out, err): (&[u8], &str), budget: &Budget, exe: &Path) -> Result<Vec<u8>> {
    let status = match ended {
        Ended::TimedOut => return Err(breach(budget, Limit::Time)),
        Ended::Exited(status) => status,
    };
    if status.success() {
        return decode_answer(out, exe);
    }
    Err(match cause(status, err) {
        Some(limit) => breach(budget, limit),
        None => Error::Template {
            file: budget.template.clone(),
            line: None,
            message: format!(
                "the typesetter stopped ({}){}",
                describe(status),
                last_line(err).map_or(String::new(), |l| format!(": {l}"))
            ),
        },
    })
}

/// Which limit an abnormal end of the child means, if any.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Limit {
    Time,
    Memory,
    Stack,
}

fn cause(status: ExitStatus, err: &str) -> Option<Limit> {
    if err.contains("memory allocation of") || err.contains("capacity overflow") {
        return Some(Limit::Memory);
    }
    if err.contains("has overflowed its stack") {
        return Some(Limit::Stack);
    }
    #[cfg(unix)]
    {
        use std::os::unix::process::ExitStatusExt;
        if status.signal() == Some(libc::SIGXCPU) {
            return Some(Limit::Time);
        }
    }
    let _ = status;
    None
}

fn describe(status: ExitStatus) -> String {
    #[cfg(unix)]
    {
        use std::os::unix::process::ExitStatusExt;
        if let Some(sig) = status.signal() {
            return format!("signal {sig}");
        }
    }
    match status.code() {
        Some(c) => format!("exit code {c}"),
        None => "no exit code".into(),
    }
}

/// The last line of the child's stderr that says something (a panic's message, not the note after it).
fn last_line(text: &str) -> Option<&str> {
    text.lines()
        .map(str::trim)
        .rfind(|l| !l.is_empty() && !l.starts_with("note:"))
}

/// The template error of a budget breach: the template, the limit, and how to raise it.
fn breach(b: &Budget, limit: Limit) -> Error {
    let config = b.config.display();
    let message = match limit {
        Limit::Time => format!(
            "typesetting did not finish within {} s, the time budget (report.typeset_seconds in {config}); a template that loops without end does this: look for a loop or recursion in the templates, or raise report.typeset_seconds if the pack is simply large",
            b.seconds
        ),
        Limit::Memory => match inherited_data_limit_mb().filter(|mb| *mb < b.memory_mb) {
            Some(mb) => format!(
                "typesetting needed more than {mb} MB, the data-segment limit this process was started with (`ulimit -d`), which is below report.typeset_memory_mb ({} MB in {config}); raise that limit, or look for a template that builds a huge array, string or range",
                b.memory_mb
            ),
            None => format!(
                "typesetting needed more than {} MB, the memory budget (report.typeset_memory_mb in {config}); a template that builds a huge array, string or range does this: look for one in the templates, or raise report.typeset_memory_mb if the pack is simply large",
                b.memory_mb
            ),
        },
        Limit::Stack => "typesetting ran out of stack: a template nests content or calls too deeply; flatten the nesting".to_string(),
    };
    Error::Template {
        file: b.template.clone(),
        line: None,
        message,
    }
}

/// The data-segment limit this process has (and a child inherits), in MB, when there is one.
#[cfg(unix)]
#[allow(clippy::unnecessary_cast)] // rlim_t is u64 on Linux, not on every Unix
fn inherited_data_limit_mb() -> Option<u64> {
    let mut now = libc::rlimit {
        rlim_cur: 0,
        rlim_max: 0,
    };
    // SAFETY: `now` is a valid rlimit for getrlimit to fill.
    if unsafe { libc::getrlimit(libc::RLIMIT_DATA, &mut now) } != 0
        || now.rlim_cur == libc::RLIM_INFINITY
    {
        return None;
    }
    Some(now.rlim_cur as u64 >> 20)
}

#[cfg(not(unix))]
fn inherited_data_limit_mb() -> Option<u64> {
    None
}

/// The child: caps its own memory and CPU time, reads a job on stdin, typesets it and writes the answer
/// on stdout. Returns the process exit code.
pub fn serve(memory_mb: u64, seconds: u64) -> i32 {
    if let Err(e) = limit_self(memory_mb, seconds) {
        eprintln!("typesetter: cannot set its limits: {e}");
        return 1;
    }
    let mut input = Vec::new();
    if let Err(e) = std::io::stdin().lock().read_to_end(&mut input) {
        eprintln!("typesetter: cannot read the job: {e}");
        return 1;
    }
    let job = match decode_job(&input) {
        Ok(job) => job,
        Err(e) => {
            eprintln!("typesetter: malformed job: {e}");
            return 1;
        }
    };
    drop(input);
    let out = encode_answer(&typeset_here(job));
    match std::io::stdout().lock().write_all(&out) {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("typesetter: cannot write the answer: {e}");
            1
        }
    }
}

/// Memory cap, a CPU-time backstop, and death with the parent (so a killed run leaves no typesetter
/// running on).
#[cfg(unix)]
fn limit_self(memory_mb: u64, seconds: u64) -> std::io::Result<()> {
    let bytes = memory_mb.saturating_mul(1 << 20);
    set_limit(libc::RLIMIT_DATA, bytes, bytes)?;
    // Wall time is the parent's to enforce; CPU time only stops a child the parent can no longer stop.
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get() as u64);
    let cpu = seconds.saturating_mul(threads).saturating_add(30);
    set_limit(libc::RLIMIT_CPU, cpu, cpu.saturating_add(5))?;
    #[cfg(target_os = "linux")]
    {
        // SAFETY: prctl with PR_SET_PDEATHSIG takes a signal number and touches no memory of ours.
        let r = unsafe { libc::prctl(libc::PR_SET_PDEATHSIG, libc::SIGKILL as libc::c_ulong) };
        if r != 0 {
            return Err(std::io::Error::last_os_error());
        }
        // SAFETY: getppid has no preconditions.
        if unsafe { libc::getppid() } == 1 {
            return Err(std::io::Error::other("the run that started it has ended"));
        }
    }
    Ok(())
}

/// The type `setrlimit` takes its resource as (glibc names its own).
#[cfg(all(target_os = "linux", target_env = "gnu"))]
type Resource = libc::__rlimit_resource_t;
#[cfg(all(unix, not(all(target_os = "linux", target_env = "gnu"))))]
type Resource = libc::c_int;

/// Lowers a resource limit to `soft`/`hard`; a limit the process already has that is stricter stays.
#[cfg(unix)]
fn set_limit(resource: Resource, soft: u64, hard: u64) -> std::io::Result<()> {
    let mut now = libc::rlimit {
        rlim_cur: 0,
        rlim_max: 0,
    };
    // SAFETY: `now` is a valid rlimit for getrlimit to fill.
    if unsafe { libc::getrlimit(resource, &mut now) } != 0 {
        return Err(std::io::Error::last_os_error());
    }
    let hard = (hard as libc::rlim_t).min(now.rlim_max);
    let limit = libc::rlimit {
        rlim_cur: (soft as libc::rlim_t).min(hard),
        rlim_max: hard,
    };
    // SAFETY: `limit` is a valid rlimit that outlives the call.
    if unsafe { libc::setrlimit(resource, &limit) } != 0 {
        return Err(std::io::Error::last_os_error());
    }
    Ok(())
}

#[cfg(not(unix))]
fn limit_self(_memory_mb: u64, _seconds: u64) -> std::io::Result<()> {
    Ok(())
}

// The job and answer formats: a magic line, then length-prefixed fields (u64 little-endian lengths).

const MAGIC: &[u8] = b"tailpack typeset job 1\n";
const PDF: u8 = b'P';
const FAILED: u8 = b'E';

fn put(out: &mut Vec<u8>, bytes: &[u8]) {
    out.extend_from_slice(&(bytes.len() as u64).to_le_bytes());
    out.extend_from_slice(bytes);
}

fn put_u64(out: &mut Vec<u8>, n: u64) {
    out.extend_from_slice(&n.to_le_bytes());
}

/// The job as the child reads it.
fn encode(job: &Job) -> Vec<u8> {
    let size: usize = job.files.iter().map(|f| f.bytes.len() + 64).sum::<usize>()
        + job.fonts.iter().map(Vec::len).sum::<usize>();
    let mut out = Vec::with_capacity(size + 256);
    out.extend_from_slice(MAGIC);
    put(&mut out, job.today.to_string().as_bytes());
    put(&mut out, job.pack_id.as_bytes());
    put_u64(&mut out, job.files.len() as u64);
    for f in &job.files {
        put(&mut out, f.vpath.as_bytes());
        let (tag, text) = match &f.origin {
            Origin::Builtin(name) => (b'B', name.to_string()),
            Origin::Custom(path) => (b'C', path.display().to_string()),
            Origin::Generated => (b'G', String::new()),
        };
        out.push(tag);
        put(&mut out, text.as_bytes());
        put(&mut out, &f.bytes);
    }
    put_u64(&mut out, job.fonts.len() as u64);
    for font in &job.fonts {
        put(&mut out, font);
    }
    out
}

/// Reads fields of the job or answer formats, refusing anything short or out of place.
struct Reader<'a> {
    rest: &'a [u8],
}

impl<'a> Reader<'a> {
    fn take(&mut self, n: usize) -> std::result::Result<&'a [u8], String> {
        if self.rest.len() < n {
            return Err(format!("{n} bytes expected, {} left", self.rest.len()));
        }
        let (head, tail) = self.rest.split_at(n);
        self.rest = tail;
        Ok(head)
    }

    fn u64(&mut self) -> std::result::Result<u64, String> {
        let b = self.take(8)?;
        Ok(u64::from_le_bytes(b.try_into().expect("eight bytes")))
    }

    fn bytes(&mut self) -> std::result::Result<&'a [u8], String> {
        let n = usize::try_from(self.u64()?).map_err(|e| e.to_string())?;
        self.take(n)
    }

    fn text(&mut self) -> std::result::Result<String, String> {
        String::from_utf8(self.bytes()?.to_vec()).map_err(|e| e.to_string())
    }
}

fn decode_job(input: &[u8]) -> std::result::Result<Job, String> {
    let mut r = Reader { rest: input };
    if r.take(MAGIC.len())? != MAGIC {
        return Err("not a typeset job of this tailpack version".into());
    }
    let today = r.text()?.parse().map_err(|e| format!("date: {e}"))?;
    let pack_id = r.text()?;
    let count = r.u64()?;
    let mut files = Vec::new();
    for _ in 0..count {
        let vpath = r.text()?;
        let tag = r.take(1)?[0];
        let text = r.text()?;
        let origin = match tag {
            b'B' => Origin::Builtin(builtin_name(&text)?),
            b'C' => Origin::Custom(PathBuf::from(text)),
            b'G' => Origin::Generated,
            other => return Err(format!("unknown file origin {other}")),
        };
        let bytes = r.bytes()?.to_vec();
        files.push(WorldFile {
            vpath,
            bytes,
            origin,
        });
    }
    let fonts = (0..r.u64()?)
        .map(|_| r.bytes().map(<[u8]>::to_vec))
        .collect::<std::result::Result<_, _>>()?;
    Ok(Job {
        files,
        fonts,
        today,
        pack_id,
    })
}

fn builtin_name(name: &str) -> std::result::Result<&'static str, String> {
    super::templates::DEFAULTS
        .iter()
        .map(|(n, _)| *n)
        .find(|n| *n == name)
        .ok_or_else(|| format!("no built-in template {name}"))
}

/// The child's answer: the PDF, or the template error with its place (any other error as its message,
/// with no file).
fn encode_answer(result: &Result<Vec<u8>>) -> Vec<u8> {
    let mut out = Vec::new();
    match result {
        Ok(pdf) => {
            out.push(PDF);
            out.extend_from_slice(pdf);
        }
        Err(e) => {
            out.push(FAILED);
            let (file, place, message) = match e {
                Error::Template {
                    file,
                    line,
                    message,
                } => (file.clone(), *line, message.clone()),
                Error::Typesetter { message, .. } => (String::new(), None, message.clone()),
                other => (String::new(), None, other.to_string()),
            };
            put(&mut out, file.as_bytes());
            let (l, c) = place.unwrap_or((0, 0));
            put_u64(&mut out, l as u64);
            put_u64(&mut out, c as u64);
            put(&mut out, message.as_bytes());
        }
    }
    out
}

/// The PDF or the error in the answer of the typesetter `exe`: a template error as such, any other error
/// of the child as the typesetter's.
fn decode_answer(out: &[u8], exe: &Path) -> Result<Vec<u8>> {
    let broken = |why: String| failed(exe, format!("its answer is malformed: {why}"));
    match out.split_first() {
        Some((&PDF, pdf)) => Ok(pdf.to_vec()),
        Some((&FAILED, rest)) => {
            let mut r = Reader { rest };
            let file = r.text().map_err(broken)?;
            let (l, c) = (r.u64().map_err(broken)?, r.u64().map_err(broken)?);
            let message = r.text().map_err(broken)?;
            if file.is_empty() {
                return Err(failed(exe, message));
            }
            Err(Error::Template {
                file,
                line: (l > 0).then_some((l as usize, c as usize)),
                message,
            })
        }
        _ => Err(broken("it is empty".into())),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn job() -> Job {
        Job {
            files: vec![
                WorldFile {
                    vpath: "/main.typ".into(),
                    bytes: b"= Hello".to_vec(),
                    origin: Origin::Builtin("main.typ"),
                },
                WorldFile {
                    vpath: "/logo.svg".into(),
                    bytes: vec![0, 1, 2, 255],
                    origin: Origin::Custom("tpl/logo.svg".into()),
                },
                WorldFile {
                    vpath: "/data/report.json".into(),
                    bytes: b"{}".to_vec(),
                    origin: Origin::Generated,
                },
            ],
            fonts: vec![vec![7; 10]],
            today: "2026-11-30".parse().unwrap(),
            pack_id: "abc".into(),
        }
    }

    #[test]
    fn a_job_reads_back_as_written() {
        let j = decode_job(&encode(&job())).unwrap();
        assert_eq!(j.today.to_string(), "2026-11-30");
        assert_eq!(j.pack_id, "abc");
        assert_eq!(j.fonts, vec![vec![7; 10]]);
        let seen: Vec<(String, Vec<u8>, String)> = j
            .files
            .iter()
            .map(|f| {
                (
                    f.vpath.clone(),
                    f.bytes.clone(),
                    f.origin.describe(&f.vpath),
                )
            })
            .collect();
        assert_eq!(
            seen,
            vec![
                (
                    "/main.typ".into(),
                    b"= Hello".to_vec(),
                    "templates/main.typ (built-in)".into()
                ),
                (
                    "/logo.svg".into(),
                    vec![0, 1, 2, 255],
                    "tpl/logo.svg".into()
                ),
                (
                    "/data/report.json".into(),
                    b"{}".to_vec(),
                    "data/report.json (generated)".into()
                ),
            ]
        );
    }

    #[test]
    fn a_cut_or_foreign_job_is_refused_not_misread() {
        let bytes = encode(&job());
        for n in [0, 5, MAGIC.len() + 3, bytes.len() - 1] {
            assert!(decode_job(&bytes[..n]).is_err(), "cut at {n}");
        }
        assert!(decode_job(b"%PDF-1.7 something else").is_err());
    }

    #[test]
    fn an_abnormal_end_is_read_from_what_the_child_printed() {
        let status = std::process::Command::new("false").status().unwrap();
        // Rust's own words for an allocation failure, a stack overflow and a panic.
        let oom = "memory allocation of 34359738368 bytes failed\n";
        assert_eq!(cause(status, oom), Some(Limit::Memory));
        let deep =
            "\nthread 'main' has overflowed its stack\nfatal runtime error: stack overflow\n";
        assert_eq!(cause(status, deep), Some(Limit::Stack));
        let panic = "thread 'main' panicked at src/x.rs:1:1:\nindex out of bounds\nnote: run with `RUST_BACKTRACE=1` environment variable to display a backtrace\n";
        assert_eq!(cause(status, panic), None);
        assert_eq!(last_line(panic), Some("index out of bounds"));
    }

    #[test]
    fn answers_read_back_as_written() {
        let exe = Path::new("/opt/tailpack");
        assert_eq!(
            decode_answer(&encode_answer(&Ok(b"%PDF".to_vec())), exe).unwrap(),
            b"%PDF"
        );
        let e = Error::Template {
            file: "tpl/summary.typ".into(),
            line: Some((3, 2)),
            message: "unknown variable: x".into(),
        };
        let back = decode_answer(&encode_answer(&Err(e)), exe).unwrap_err();
        assert_eq!(
            back.to_string(),
            "template tpl/summary.typ, line 3, column 2: unknown variable: x"
        );
    }

    #[test]
    fn a_child_that_fails_outside_the_templates_is_a_typesetter_error_naming_the_program() {
        let exe = Path::new("/opt/tailpack");
        let refused = Error::Typesetter {
            program: None,
            message: "PDF/A-2b settings refused: x".into(),
        };
        let back = decode_answer(&encode_answer(&Err(refused)), exe).unwrap_err();
        assert!(
            matches!(&back, Error::Typesetter { program: Some(p), .. } if p == exe),
            "{back:?}"
        );
        assert_eq!(
            back.to_string(),
            "typesetter /opt/tailpack: PDF/A-2b settings refused: x"
        );
        assert_eq!(back.exit_code(), crate::error::EXIT_FAILURE);
        for garbled in [&b""[..], b"E\x01", b"?%PDF"] {
            let e = decode_answer(garbled, exe).unwrap_err();
            assert!(
                matches!(e, Error::Typesetter { .. })
                    && e.to_string()
                        .starts_with("typesetter /opt/tailpack: its answer is malformed: "),
                "{e}"
            );
        }
    }
}
