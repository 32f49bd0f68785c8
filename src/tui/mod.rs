//! The terminal interface over a run directory (DEVELOPERS.md, `src/tui/`).
//!
//! `source` reads the run directory into `state::ViewerState`; `input` turns keys into actions
//! on `input::Screen`; `draw` paints state and screen; this module is the loop, and
//! `terminal` the only code that changes the terminal's modes. **Invariant:** the viewer
//! reads the run directory and never calls `fit` or `physics`; attached to a fit it touches
//! only the fit's stop and pause flags.

pub mod draw;
pub mod input;
pub mod source;
pub mod state;
pub mod terminal;

use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant, SystemTime};

use crossterm::event::{self, Event};

use draw::{draw, Look, Scene};
use input::{action_for_key, Effect, Mode, Screen};
use source::RunSource;
use state::ViewerState;
use terminal::{is_restored_by_panic, wait_for_input, TerminalSession, Wait};

/// How often the run directory's files are looked at (their size and time only, unless they
/// changed) while the fit runs, and once it has ended.
const POLL_RUNNING: Duration = Duration::from_millis(400);
const POLL_ENDED: Duration = Duration::from_millis(1000);
/// The screen is redrawn on a change, on a key, and at least this often (for the ages).
const TICK: Duration = Duration::from_secs(1);
/// More terminal events than this in one second is not a person typing: a closed terminal
/// that reports end-of-file forever. The viewer then gives the terminal up instead of spinning.
const MAX_EVENTS_PER_S: u32 = 500;

const PAUSE_REQUESTED: &str = "pause requested: the fit pauses after this generation";
const RESUMING: &str = "resuming";

#[derive(Debug, thiserror::Error)]
pub enum TuiError {
    #[error("cannot use the terminal")]
    Terminal(#[source] std::io::Error),
    #[error("{} is not a run directory (no progress.jsonl, summary.json or cases/)", .0.display())]
    NotARun(std::path::PathBuf),
}

/// The fit a viewer is attached to: its flags, and whether its worker thread has returned.
pub struct FitControl<'a> {
    pub stop: &'a AtomicBool,
    pub pause: &'a AtomicBool,
    /// Set when SIGHUP arrives: the terminal is gone even if no write has failed yet.
    pub hangup: &'a AtomicBool,
    pub is_worker_finished: &'a dyn Fn() -> bool,
}

/// How an attached viewer ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ViewerEnd {
    /// The user left (after the fit's outputs were written, or the fit ended by itself and
    /// failed, or the worker returned before it started).
    Left,
    /// The terminal went away (hang-up, failed writes or reads, or a panic restored it); the
    /// fit carries on and the caller must not print to the terminal.
    TerminalLost,
}

/// `emberfit watch`: a read-only viewer of a run directory until the user quits.
pub fn watch(root: &Path) -> Result<(), TuiError> {
    let looks_like_run = [
        "progress.jsonl",
        "summary.json",
        "cases",
        "run.toml",
        "job.toml",
    ]
    .iter()
    .any(|f| root.join(f).exists());
    if !looks_like_run {
        return Err(TuiError::NotARun(root.to_path_buf()));
    }
    let mut session = TerminalSession::enter().map_err(TuiError::Terminal)?;
    match run_loop(&mut session, root, None) {
        LoopEnd::Left => Ok(()),
        LoopEnd::Lost(err) => {
            session.give_up();
            Err(TuiError::Terminal(err))
        }
    }
}

/// The viewer of a fit running on worker threads of this process.
pub fn attach(root: &Path, control: &FitControl) -> Result<ViewerEnd, TuiError> {
    let mut session = TerminalSession::enter().map_err(TuiError::Terminal)?;
    Ok(match run_loop(&mut session, root, Some(control)) {
        LoopEnd::Left => ViewerEnd::Left,
        LoopEnd::Lost(_) => {
            session.give_up();
            ViewerEnd::TerminalLost
        }
    })
}

enum LoopEnd {
    Left,
    Lost(std::io::Error),
}

fn run_loop(session: &mut TerminalSession, root: &Path, control: Option<&FitControl>) -> LoopEnd {
    let mode = if control.is_some() {
        Mode::Attached
    } else {
        Mode::ReadOnly
    };
    let look = Look::from_env();
    let mut source = RunSource::new(root);
    let mut state = ViewerState::default();
    let mut screen = Screen::new(mode);
    let mut is_dirty = true;
    let mut last_poll: Option<Instant> = None;
    let mut last_draw: Option<Instant> = None;
    let mut burst = Burst::default();
    let lost = |what: &str| LoopEnd::Lost(std::io::Error::other(what.to_string()));
    loop {
        if is_restored_by_panic() {
            return lost("a panic restored the terminal");
        }
        if let Some(control) = control {
            if control.hangup.load(Ordering::SeqCst) {
                return lost("the terminal hung up");
            }
        }
        let poll_every = if state.is_over() {
            POLL_ENDED
        } else {
            POLL_RUNNING
        };
        if last_poll.is_none_or(|t| t.elapsed() >= poll_every) {
            is_dirty |= source.refresh(&mut state);
            last_poll = Some(Instant::now());
        }
        if let Some(control) = control {
            if (control.is_worker_finished)() {
                source.refresh(&mut state);
                // Leave when asked to, or when the worker returned without a finished fit
                // (an error the caller reports once the screen is restored).
                if screen.is_quit_requested || state.finished.is_none() {
                    return LoopEnd::Left;
                }
                if screen.is_stop_requested {
                    screen.is_stop_requested = false;
                    screen.message = Some("the fit stopped; its outputs are written".into());
                    is_dirty = true;
                }
            }
            let pause_note = match (control.pause.load(Ordering::SeqCst), state.is_paused) {
                (true, false) => Some(PAUSE_REQUESTED),
                (false, true) => Some(RESUMING),
                _ => None,
            };
            let shows_pause_note = screen
                .message
                .as_deref()
                .is_some_and(|m| m == PAUSE_REQUESTED || m == RESUMING);
            if (screen.message.is_none() || shows_pause_note)
                && screen.message.as_deref() != pause_note
                && !state.is_over()
            {
                screen.message = pause_note.map(str::to_string);
                is_dirty = true;
            }
        }
        if is_dirty || last_draw.is_none_or(|t| t.elapsed() >= TICK) {
            let scene = Scene {
                state: &state,
                screen: &screen,
                look,
                now: SystemTime::now(),
            };
            if let Err(err) = session.terminal.draw(|frame| draw(frame, &scene)) {
                return LoopEnd::Lost(err);
            }
            is_dirty = false;
            last_draw = Some(Instant::now());
            // Test seam, in debug builds only: the end-to-end test panics the viewer here to
            // check that the panic hook gives the terminal back.
            #[cfg(debug_assertions)]
            if std::env::var_os("EMBERFIT_TEST_PANIC_AFTER_DRAW").is_some() {
                panic!("test panic after the first draw (EMBERFIT_TEST_PANIC_AFTER_DRAW)");
            }
        }
        let until_poll =
            poll_every.saturating_sub(last_poll.map_or(Duration::ZERO, |t| t.elapsed()));
        let until_tick = TICK.saturating_sub(last_draw.map_or(Duration::ZERO, |t| t.elapsed()));
        let timeout = until_poll.min(until_tick).max(Duration::from_millis(20));
        // Wait on the terminal ourselves: crossterm's own wait reads a hung-up terminal's
        // end-of-file over and over until its timeout, a busy loop.
        match wait_for_input(timeout) {
            Ok(Wait::HungUp) => return lost("the terminal hung up"),
            Ok(Wait::Input | Wait::Timeout) => {}
            Err(err) => return LoopEnd::Lost(err),
        }
        // Everything crossterm has ready now: keys, and resizes it learnt of by signal.
        loop {
            match event::poll(Duration::ZERO) {
                Ok(false) => break,
                Ok(true) if burst.count() > MAX_EVENTS_PER_S => {
                    return lost("the terminal reports events without end");
                }
                Ok(true) => {}
                Err(err) => return LoopEnd::Lost(err),
            }
            match event::read() {
                Ok(Event::Key(key)) => {
                    let Some(action) = action_for_key(key) else {
                        // Any other key answers a pending stop question with no.
                        if key.kind == event::KeyEventKind::Press
                            && screen.confirm_stop.take().is_some()
                        {
                            screen.message = Some("not stopped".into());
                            is_dirty = true;
                        }
                        continue;
                    };
                    screen.holder_pid = state.holder_pid;
                    let effect = screen.apply(action, &state.cases(), state.is_over());
                    is_dirty = true;
                    match (effect, control) {
                        (Effect::Quit, _) => return LoopEnd::Left,
                        (Effect::Interrupt(pid), _) => screen.message = Some(interrupt(pid)),
                        (Effect::TogglePause, Some(control)) => {
                            control.pause.fetch_xor(true, Ordering::SeqCst);
                        }
                        (Effect::Stop | Effect::StopThenQuit, Some(control)) => {
                            control.stop.store(true, Ordering::SeqCst);
                            // A paused fit must wake up to stop.
                            control.pause.store(false, Ordering::SeqCst);
                        }
                        _ => {}
                    }
                }
                Ok(Event::Resize(..)) => is_dirty = true,
                Ok(_) => {}
                Err(err) => return LoopEnd::Lost(err),
            }
        }
    }
}

/// Sends SIGINT to the fit in `run.lock` if this user owns it (a watcher's `s` then `y`);
/// returns what to tell the user.
fn interrupt(pid: u32) -> String {
    use std::os::unix::fs::MetadataExt;
    let command = format!("kill -INT {pid}");
    let Ok(metadata) = std::fs::metadata(format!("/proc/{pid}")) else {
        return format!("no process {pid} (the fit may have ended); nothing sent");
    };
    // SAFETY: geteuid has no preconditions and cannot fail.
    let me = unsafe { libc::geteuid() };
    if metadata.uid() != me {
        return format!("process {pid} is not yours: its owner can stop it with {command}");
    }
    let Ok(raw) = libc::pid_t::try_from(pid) else {
        return format!("pid {pid} is out of range; nothing sent");
    };
    // SAFETY: kill has no memory preconditions; the pid was checked to be this user's.
    if unsafe { libc::kill(raw, libc::SIGINT) } == 0 {
        format!("sent SIGINT ({command}): the fit finishes its iteration and writes its outputs")
    } else {
        format!("{command} failed: {}", std::io::Error::last_os_error())
    }
}

/// Counts events in the current one-second window.
#[derive(Default)]
struct Burst {
    window_start: Option<Instant>,
    n_events: u32,
}

impl Burst {
    fn count(&mut self) -> u32 {
        match self.window_start {
            Some(t) if t.elapsed() < Duration::from_secs(1) => self.n_events += 1,
            _ => {
                self.window_start = Some(Instant::now());
                self.n_events = 1;
            }
        }
        self.n_events
    }
}
