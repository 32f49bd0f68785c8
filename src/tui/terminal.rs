//! Entering and leaving the terminal's raw mode and alternate screen. The terminal is restored
//! when the [`TerminalSession`] is dropped (normal end or an error) and by a panic hook (a
//! panic on any thread). Restoring never panics and never prints: after an SSH drop the
//! terminal is gone and every write fails, and the fit must carry on regardless.

use std::io::{stdout, Stdout};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Once;

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

/// The terminal in raw mode on the alternate screen, for as long as this value lives.
pub struct TerminalSession {
    pub terminal: Terminal<CrosstermBackend<Stdout>>,
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
        let setup = execute!(stdout(), EnterAlternateScreen)
            .and_then(|()| Terminal::new(CrosstermBackend::new(stdout())));
        match setup {
            Ok(terminal) => Ok(TerminalSession { terminal }),
            Err(err) => {
                restore(); // half-way in: undo raw mode before reporting
                Err(err)
            }
        }
    }
}

impl Drop for TerminalSession {
    fn drop(&mut self) {
        restore();
    }
}
