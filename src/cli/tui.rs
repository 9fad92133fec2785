//! `rung tui` (and `rung` alone on a terminal): the terminal runner. It owns the
//! terminal (raw mode, alternate screen, restored on exit, on panic, on
//! Ctrl-C and on SIGTERM/SIGINT/SIGHUP sent from outside), turns terminal events into `Msg`s, runs `Effect`s (computations on
//! background threads, saves at once) and redraws.

use anyhow::{Context as _, Result};
use rung::astro::time::parse_date;
use rung::io::sites;
use rung::io::targets::Target;
use rung::tui::effects;
use rung::tui::jobs::{Jobs, Lane};
use rung::tui::state::Programme;
use rung::tui::theme::Theme;
use rung::tui::{Effect, Msg, Setup, draw, init, update};
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::Duration;

/// Arguments of `rung tui`.
#[derive(clap::Args, Default)]
pub struct Args {
    /// Targets file (CSV or TOML); default: programme.csv in your config folder, else the demo.
    #[arg(long)]
    pub targets: Option<PathBuf>,
    #[command(flatten)]
    pub site: super::args::SiteArg,
    /// Night to open, YYYY-MM-DD (default: the coming night, following the clock)
    #[arg(long)]
    pub date: Option<String>,
    #[command(flatten)]
    pub instrument: super::args::InstrumentArg,
    #[command(flatten)]
    pub range: super::args::RangeArgs,
    #[command(flatten)]
    pub limits: super::args::WindowLimits,
    #[command(flatten)]
    pub goal: super::args::GoalArg,
    /// A saved plan (rung plan --save FILE) for the Next view: its visits of tonight to mark done or lost, re-planned from there (each mark written to the plan's observing log, then to the plan)
    #[arg(long)]
    pub plan: Option<PathBuf>,
}

/// The user's own programme file.
pub fn user_programme() -> PathBuf {
    sites::user_config_dir()
        .unwrap_or_else(|| PathBuf::from("."))
        .join("programme.csv")
}

/// A programme read for editing: its targets (each keeping how it was
/// written), how many rows were refused, the file's layout, and the first
/// message to show.
struct Read {
    targets: Vec<Target>,
    refused: usize,
    layout: Option<std::sync::Arc<rung::io::csv_text::Layout>>,
    message: Option<String>,
}

fn load(path: &Path) -> Result<Read> {
    let l = rung::io::targets::load_keeping(path)?;
    let kept = if l.layout.is_some() {
        "a save keeps them in the file as they are"
    } else {
        "they stay in the file until you save; a .bak copy is kept then"
    };
    let message = l
        .problems
        .first()
        .map(|p| format!("{} row(s) refused, first: {p} — {kept}", l.problems.len()))
        .or_else(|| {
            // Short enough for the status line: the field, not the whole path.
            let w = l.warnings.first()?;
            let more = match l.warnings.len() {
                1 => String::new(),
                n => format!(" ({} more warnings)", n - 1),
            };
            Some(match w {
                rung::RungError::InFile { loc, .. } if loc.field.is_some() => format!(
                    "'{}' is not a field rung reads: kept as it is when you save{more}",
                    loc.field.as_deref().unwrap_or("")
                ),
                _ => format!("warning: {w}{more}"),
            })
        });
    Ok(Read {
        targets: l.targets,
        refused: l.problems.len(),
        layout: l.layout,
        message,
    })
}

/// Build the UI's inputs from the arguments.
pub fn setup(a: &Args) -> Result<Setup> {
    let user = user_programme();
    let (targets, programme, message) = match &a.targets {
        Some(p) => {
            let Read {
                targets: t,
                refused,
                layout,
                message: msg,
            } = load(p)?;
            let is_csv = p
                .extension()
                .is_none_or(|e| !e.eq_ignore_ascii_case("toml"));
            let save_path = if is_csv {
                p.clone()
            } else {
                p.with_extension("csv")
            };
            let msg = msg.or_else(|| {
                (!is_csv).then(|| {
                    format!(
                        "TOML programme: saving writes CSV to {}",
                        save_path.display()
                    )
                })
            });
            let original = std::fs::read(p).ok();
            (
                t,
                Programme {
                    source: Some(p.clone()),
                    save_path,
                    is_demo: false,
                    refused_rows: refused,
                    original,
                    layout,
                    disk: None,
                    instance: None,
                },
                msg,
            )
        }
        None if user.exists() => {
            let r = load(&user)?;
            let original = std::fs::read(&user).ok();
            (
                r.targets,
                Programme {
                    source: Some(user.clone()),
                    save_path: user,
                    is_demo: false,
                    refused_rows: r.refused,
                    original,
                    layout: r.layout,
                    disk: None,
                    instance: None,
                },
                r.message,
            )
        }
        None => {
            let demo = super::demo_dir().join("targets.csv");
            let r = load(&demo)?;
            (
                r.targets,
                Programme {
                    source: Some(demo),
                    save_path: user,
                    is_demo: true,
                    refused_rows: r.refused,
                    original: None,
                    layout: r.layout,
                    disk: None,
                    instance: None,
                },
                r.message,
            )
        }
    };
    let settings = super::settings(
        super::args::choices(
            Some(&a.site),
            Some(&a.instrument),
            Some(&a.limits),
            Some(&a.range),
            Some(&a.goal),
        ),
        programme.source.as_deref(),
        &[],
    )?;
    let message = message.or_else(|| settings.site.zone_warning());
    let mut list = sites::catalogue().unwrap_or_default();
    if !list.iter().any(|s| s.name == settings.site.name) {
        list.push(settings.site.clone());
    }
    let date = a.date.as_deref().map(parse_date).transpose()?;
    let instrument = settings.instrument().name.clone();
    let mut instruments: Vec<String> = rung::photometry::instrument::catalogue()
        .map(|l| l.into_iter().map(|i| i.name).collect())
        .unwrap_or_default();
    if !instruments.contains(&instrument) {
        instruments.push(instrument);
    }
    // Other sessions on this programme (rung::io::session): the first holds
    // the lock; another keeps its unsaved edits in a file of its own, and every
    // save merges with what the others saved.
    let mut programme = programme;
    let claim = rung::io::session::Claim::acquire(&programme.save_path);
    programme.instance = claim.shared().then(std::process::id);
    programme.disk = Programme::disk_now(&programme.save_path);
    for p in [
        programme.save_path.clone(),
        programme.recovery_path(),
        programme.backup_path(),
    ] {
        rung::io::atomic::sweep_stale_temps(&p);
    }
    let message = match claim.other_pid {
        Some(pid) if claim.other_unseen => Some(format!(
            "{} is held by {}, not running on this machine (another host or container sharing the folder?): \
             this session counts as a second one, your unsaved edits go to {}, and a save merges with what the other saves",
            rung::io::session::lock_path(&programme.save_path).display(),
            if pid > 0 {
                format!("process {pid}")
            } else {
                "a process that does not name itself".to_string()
            },
            programme.recovery_path().display()
        )),
        Some(pid) => Some(format!(
            "another rung{} has {} open: your unsaved edits go to {}, and a save merges with what it saves",
            if pid > 0 {
                format!(" (process {pid})")
            } else {
                String::new()
            },
            programme.save_path.display(),
            programme.recovery_path().display()
        )),
        None => match claim.stale_pid {
            Some(pid) => Some(format!(
                "took over the lock left by {}, no longer running: {}",
                if pid > 0 {
                    format!("process {pid}")
                } else {
                    "a session".to_string()
                },
                programme.save_path.display(),
            )),
            None => message,
        },
    };
    let first = !claim.shared();
    *CLAIM.lock().unwrap_or_else(|e| e.into_inner()) = Some(claim);
    let (recovered, message) = effects::find_recovery(&programme, &targets, message, first);
    Ok(Setup {
        recovered,
        settings,
        sites: list,
        date,
        now: super::now()?,
        targets,
        programme,
        size: (80, 24),
        theme: Theme::from_env(),
        message,
        instruments,
    })
}

/// This session's hold on its programme ([`rung::io::session::Claim`]): the
/// lock is let go (and its file removed) when the UI ends.
static CLAIM: std::sync::Mutex<Option<rung::io::session::Claim>> = std::sync::Mutex::new(None);

fn release_claim() {
    drop(CLAIM.lock().unwrap_or_else(|e| e.into_inner()).take());
}

/// What wakes the event loop: a terminal event (read on a thread of its
/// own), or the messages of a finished background job.
enum Wake {
    Input(crossterm::event::Event),
    Done(Lane, Vec<Msg>),
    /// What a running job knows already (a budget's first targets).
    Partial(Msg),
}

/// Background jobs: the policy of [`rung::tui::jobs`] (one job per lane, a
/// newer one superseding the older, the budget after the night table) and
/// the threads that run them.
struct Runner {
    jobs: Jobs,
    tx: mpsc::Sender<Wake>,
}

impl Runner {
    fn start(&self, starts: Vec<rung::tui::jobs::Start>) {
        for st in starts {
            let tx = self.tx.clone();
            std::thread::spawn(move || {
                let part = tx.clone();
                let msgs = effects::run_streaming(st.effect, &st.cancel, &mut |m| {
                    let _ = part.send(Wake::Partial(m));
                });
                let _ = tx.send(Wake::Done(st.lane, msgs));
            });
        }
    }

    /// Run an effect: saves and the unsaved-edits file at once, in order
    /// (their messages into `inline`), computations as background jobs.
    fn spawn(&mut self, effect: Effect, inline: &mut Vec<Msg>) {
        match effect {
            Effect::Batch(list) => {
                for e in list {
                    self.spawn(e, inline);
                }
            }
            e @ (Effect::Save(_) | Effect::Recovery { .. } | Effect::Next(_)) => {
                inline.extend(effects::run(e))
            }
            e => {
                let starts = self.jobs.submit(e);
                self.start(starts);
            }
        }
    }

    /// A job ended: start what waited for it.
    fn finished(&mut self, lane: Lane) {
        let starts = self.jobs.finished(lane);
        self.start(starts);
    }
}

fn apply(state: &mut rung::tui::State, msg: Msg, runner: &mut Runner) {
    let mut queue = vec![msg];
    while let Some(m) = queue.pop() {
        if let Some(e) = update(state, m) {
            let mut inline = Vec::new();
            runner.spawn(e, &mut inline);
            inline.reverse();
            queue.extend(inline);
        }
    }
}

/// Read terminal events on a thread of their own, so that the event loop
/// sleeps until an event or a job's result arrives (no polling delay).
fn read_input(tx: mpsc::Sender<Wake>) {
    std::thread::spawn(move || {
        while let Ok(ev) = crossterm::event::read() {
            if tx.send(Wake::Input(ev)).is_err() {
                break;
            }
        }
    });
}

/// The longest the event loop sleeps without a message: how soon a signal
/// from outside is seen.
const SIGNAL_CHECK: Duration = Duration::from_millis(250);

/// The most time spent applying queued keys and results before the screen is
/// redrawn (a pasted burst is applied in slices, redrawing between them).
const DRAIN_SLICE: Duration = Duration::from_millis(30);

/// Signals that end the UI from outside (kill, a closed terminal, Ctrl-C sent
/// by another process); each sets a flag the event loop checks, so the terminal
/// is restored before the process ends.
const END_SIGNALS: [i32; 3] = [
    signal_hook::consts::SIGTERM,
    signal_hook::consts::SIGINT,
    signal_hook::consts::SIGHUP,
];

/// Register the end signals; the returned cell holds the signal number once one arrives.
fn watch_signals() -> Result<std::sync::Arc<std::sync::atomic::AtomicUsize>> {
    let got = std::sync::Arc::new(std::sync::atomic::AtomicUsize::new(0));
    for sig in END_SIGNALS {
        signal_hook::flag::register_usize(sig, got.clone(), sig as usize)
            .with_context(|| format!("cannot watch signal {sig}"))?;
    }
    Ok(got)
}

fn event_loop(
    terminal: &mut ratatui::DefaultTerminal,
    mut setup: Setup,
    signalled: &std::sync::atomic::AtomicUsize,
    plan: Option<PathBuf>,
) -> Result<Option<PathBuf>> {
    let size = terminal.size()?;
    setup.size = (size.width, size.height);
    let (tx, rx) = mpsc::channel::<Wake>();
    let mut runner = Runner {
        jobs: Jobs::default(),
        tx: tx.clone(),
    };
    let (mut state, first) = init(setup);
    state.plan_file = plan;
    if let Some(e) = first {
        let mut inline = Vec::new();
        runner.spawn(e, &mut inline);
        for m in inline {
            apply(&mut state, m, &mut runner);
        }
    }
    read_input(tx);
    let mut last_tick = std::time::Instant::now();
    // Test hook for the terminal-restore test (tests/tui_tmux.rs): panic after the first frame.
    let panic_test = std::env::var_os("RUNG_TUI_TEST_PANIC").is_some();
    let handle = |state: &mut rung::tui::State, runner: &mut Runner, w: Wake| match w {
        Wake::Input(crossterm::event::Event::Key(k)) => apply(state, Msg::Key(k), runner),
        Wake::Input(crossterm::event::Event::Resize(w, h)) => {
            apply(state, Msg::Resize(w, h), runner)
        }
        Wake::Input(_) => {}
        Wake::Partial(m) => apply(state, m, runner),
        Wake::Done(lane, msgs) => {
            for m in msgs {
                apply(state, m, runner);
            }
            runner.finished(lane);
        }
    };
    // Draw when something happened (a key, a result, the clock), not on every wake-up.
    let mut redraw = true;
    loop {
        if redraw {
            terminal.draw(|f| draw(&state, f))?;
            redraw = false;
        }
        if panic_test {
            panic!("RUNG_TUI_TEST_PANIC is set: panicking on purpose to test terminal restore");
        }
        if state.quit || signalled.load(std::sync::atomic::Ordering::Relaxed) != 0 {
            // Edits still unsaved at the end are in the recovery file (kept after every change).
            let kept = state.programme.recovery_path();
            return Ok((state.dirty() && kept.exists()).then_some(kept));
        }
        // Sleep until a key, a result or the next tick; then apply everything
        // queued (a burst of keys, results) before drawing once.
        let tick_in = Duration::from_secs(1).saturating_sub(last_tick.elapsed());
        if let Ok(w) = rx.recv_timeout(tick_in.min(SIGNAL_CHECK)) {
            redraw = true;
            let slice = std::time::Instant::now();
            handle(&mut state, &mut runner, w);
            while slice.elapsed() < DRAIN_SLICE && !state.quit {
                match rx.try_recv() {
                    Ok(w) => handle(&mut state, &mut runner, w),
                    Err(_) => break,
                }
            }
        }
        if last_tick.elapsed() >= Duration::from_secs(1) {
            last_tick = std::time::Instant::now();
            if let Ok(now) = super::now() {
                apply(&mut state, Msg::Tick(now), &mut runner);
                redraw = true;
            }
        }
    }
}

/// Whether a terminal still answers (a hung-up or closed terminal fails the
/// window-size query with an error).
fn terminal_alive(tty: &std::fs::File) -> bool {
    use std::os::fd::AsRawFd;
    let mut ws = libc::winsize {
        ws_row: 0,
        ws_col: 0,
        ws_xpixel: 0,
        ws_ypixel: 0,
    };
    // SAFETY: TIOCGWINSZ writes one `winsize` into the struct we pass, on an fd we own.
    unsafe { libc::ioctl(tty.as_raw_fd(), libc::TIOCGWINSZ, &mut ws) == 0 }
}

/// End the process when its terminal goes away without a SIGHUP reaching it
/// (seen when a terminal multiplexer is killed): the terminal's reader then
/// sees end-of-file forever and the event loop never gets control back. The
/// unsaved edits are already in the recovery file (written after every change)
/// and there is no terminal left to restore, so the watcher just ends the
/// process with the hang-up status. It watches the controlling terminal
/// (`/dev/tty`, what the UI reads and draws on even when standard input is
/// redirected); without one there is nothing to watch.
fn watch_terminal() {
    let Ok(tty) = std::fs::OpenOptions::new()
        .read(true)
        .write(true)
        .open("/dev/tty")
    else {
        return;
    };
    std::thread::spawn(move || {
        loop {
            std::thread::sleep(Duration::from_secs(1));
            if !terminal_alive(&tty) {
                std::process::exit(128 + signal_hook::consts::SIGHUP);
            }
        }
    });
}

/// Open the UI.
pub fn run(a: Args) -> Result<()> {
    let setup = setup(&a)?;
    // ratatui's init installs a panic hook that restores the terminal first.
    let signalled = watch_signals()?;
    let mut terminal = ratatui::try_init().context("cannot open the terminal")?;
    watch_terminal();
    let res = event_loop(&mut terminal, setup, &signalled, a.plan.clone());
    ratatui::restore();
    release_claim();
    let sig = signalled.load(std::sync::atomic::Ordering::Relaxed);
    let kept = match &res {
        Ok(Some(p)) => format!(
            "unsaved edits are kept in {} and offered back at the next start",
            p.display()
        ),
        _ => "nothing was left unsaved".to_string(),
    };
    if sig != 0 {
        // Terminal restored; end as the signal asked, with the shell's 128 + signal status.
        eprintln!("rung: ended by signal {sig}; {kept}");
        std::process::exit(128 + sig as i32);
    }
    if matches!(res, Ok(Some(_))) {
        eprintln!("rung: {kept}");
    }
    res.map(|_| ())
}
