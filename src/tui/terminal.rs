//! Entering and leaving the terminal's raw mode and alternate screen. The terminal is restored
//! when the [`TerminalSession`] is dropped (normal end or an error) and by a panic hook (a
//! panic on any thread). Restoring never panics and never prints: after an SSH drop the
//! terminal is gone and every write fails, and the fit must carry on regardless.

use std::io::{stdout, IsTerminal, Stdout, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Once};
use std::time::Duration;

use crossterm::cursor::Show;
use crossterm::execute;
use crossterm::terminal::{
    disable_raw_mode, enable_raw_mode, EnterAlternateScreen, LeaveAlternateScreen,
};
use ratatui::backend::CrosstermBackend;
use ratatui::Terminal;

/// Set once a panic hook has restored the terminal: the loop must not draw any more.
static RESTORED_BY_PANIC: AtomicBool = AtomicBool::new(false);
static HOOK: Once = Once::new();

/// Whether a panic (on any thread) has restored the terminal already.
pub fn is_restored_by_panic() -> bool {
    RESTORED_BY_PANIC.load(Ordering::SeqCst)
}

/// Leaves raw mode and the alternate screen; errors are ignored (the terminal may be gone).
fn restore() {
    let _ = disable_raw_mode();
    let _ = execute!(stdout(), LeaveAlternateScreen, Show);
}

/// What waiting on the terminal found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Wait {
    Input,
    /// Nothing within the timeout, or a signal arrived (the caller looks at its flags).
    Timeout,
    /// The terminal is gone (its other end closed: a closed window or a dropped SSH link).
    HungUp,
}

/// Blocks until the terminal has input, hangs up, or `timeout` passes. Reads nothing.
pub fn wait_for_input(timeout: Duration) -> std::io::Result<Wait> {
    if !std::io::stdin().is_terminal() {
        // crossterm reads /dev/tty then; let it wait (no hang-up detection here).
        return Ok(if crossterm::event::poll(timeout)? {
            Wait::Input
        } else {
            Wait::Timeout
        });
    }
    let mut stdin = libc::pollfd {
        fd: libc::STDIN_FILENO,
        events: libc::POLLIN,
        revents: 0,
    };
    let timeout_ms = timeout.as_millis().min(i32::MAX as u128) as i32;
    // SAFETY: one valid pollfd, the count says one.
    let n_ready = unsafe { libc::poll(&mut stdin, 1, timeout_ms) };
    if n_ready < 0 {
        let err = std::io::Error::last_os_error();
        return if err.kind() == std::io::ErrorKind::Interrupted {
            Ok(Wait::Timeout)
        } else {
            Err(err)
        };
    }
    if n_ready == 0 {
        return Ok(Wait::Timeout);
    }
    if stdin.revents & (libc::POLLHUP | libc::POLLERR | libc::POLLNVAL) != 0 {
        return Ok(Wait::HungUp);
    }
    Ok(Wait::Input)
}

/// Standard output that reports its first failure and then swallows everything: once the
/// terminal is gone, ratatui's own clean-up (showing the cursor when the `Terminal` drops)
/// must not fail, because on failure it prints to the dead terminal and that panics.
pub struct TerminalWriter {
    out: Stdout,
    is_gone: Arc<AtomicBool>,
}

impl Write for TerminalWriter {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        if self.is_gone.load(Ordering::SeqCst) {
            return Ok(buf.len());
        }
        self.out.write(buf).inspect_err(|_| {
            self.is_gone.store(true, Ordering::SeqCst);
        })
    }

    fn flush(&mut self) -> std::io::Result<()> {
        if self.is_gone.load(Ordering::SeqCst) {
            return Ok(());
        }
        self.out.flush().inspect_err(|_| {
            self.is_gone.store(true, Ordering::SeqCst);
        })
    }
}

/// The terminal in raw mode on the alternate screen, for as long as this value lives.
pub struct TerminalSession {
    pub terminal: Terminal<CrosstermBackend<TerminalWriter>>,
    is_gone: Arc<AtomicBool>,
}

impl TerminalSession {
    pub fn enter() -> std::io::Result<Self> {
        HOOK.call_once(|| {
            let previous = std::panic::take_hook();
            std::panic::set_hook(Box::new(move |info| {
                if !RESTORED_BY_PANIC.swap(true, Ordering::SeqCst) {
                    restore();
                }
                previous(info);
            }));
        });
        enable_raw_mode()?;
        let is_gone = Arc::new(AtomicBool::new(false));
        let writer = TerminalWriter {
            out: stdout(),
            is_gone: Arc::clone(&is_gone),
        };
        let setup = execute!(stdout(), EnterAlternateScreen)
            .and_then(|()| Terminal::new(CrosstermBackend::new(writer)));
        match setup {
            Ok(terminal) => Ok(TerminalSession { terminal, is_gone }),
            Err(err) => {
                restore(); // half-way in: undo raw mode before reporting
                Err(err)
            }
        }
    }
}

impl TerminalSession {
    /// The terminal is gone: write nothing more to it.
    pub fn give_up(&self) {
        self.is_gone.store(true, Ordering::SeqCst);
    }
}

impl Drop for TerminalSession {
    fn drop(&mut self) {
        // Errors are ignored inside: harmless when the terminal is gone.
        restore();
    }
}
