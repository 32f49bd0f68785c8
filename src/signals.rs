//! The signal handlers of `fit`: each signal only sets a flag that the fit and its interface
//! poll, so no work runs inside a handler.
//!
//! **Invariant:** the only code that installs signal handlers (`main` only resets SIGPIPE).

use std::sync::atomic::AtomicBool;
use std::sync::Arc;

use anyhow::{Context, Result};

/// The flags a fit's signals set.
pub struct FitSignals {
    /// Stop after this iteration and write the outputs (SIGINT, SIGTERM; a second exits at
    /// once).
    pub stop: Arc<AtomicBool>,
    /// Pause between evaluations (set by the interface, not by a signal).
    pub pause: Arc<AtomicBool>,
    /// The terminal is gone (SIGHUP): the interface leaves, the fit goes on.
    pub hangup: Arc<AtomicBool>,
    /// SIGTERM (or SIGHUP without a terminal): the process is to end once the outputs are
    /// written, also when the interface is shown.
    pub terminated: Arc<AtomicBool>,
}

impl FitSignals {
    /// Installs the handlers. First SIGINT/SIGTERM: stop cleanly after this generation; a
    /// second one exits at once. SIGHUP (a closed terminal or a dropped SSH link) does not
    /// stop the fit: it only tells the interface that the terminal is gone — unless the
    /// process has no terminal at all (a service manager, `kill PID`, a detached fit), where
    /// it ends the fit like SIGTERM.
    pub fn install() -> Result<Self> {
        let signals = FitSignals {
            stop: Arc::new(AtomicBool::new(false)),
            pause: Arc::new(AtomicBool::new(false)),
            hangup: Arc::new(AtomicBool::new(false)),
            terminated: Arc::new(AtomicBool::new(false)),
        };
        for signal in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
            signal_hook::flag::register_conditional_shutdown(signal, 1, Arc::clone(&signals.stop))
                .context("installing the signal handlers")?;
            signal_hook::flag::register(signal, Arc::clone(&signals.stop))
                .context("installing the signal handlers")?;
        }
        signal_hook::flag::register(signal_hook::consts::SIGHUP, Arc::clone(&signals.hangup))
            .context("installing the signal handlers")?;
        // After the handlers above, so a first SIGTERM is not taken for a second one.
        signals.install_end_signals()?;
        Ok(signals)
    }

    /// SIGTERM, and SIGHUP when the process has no terminal: stop after this iteration, write
    /// the outputs and end the process — also when the interface is shown (its loop leaves on
    /// the `hangup` flag).
    fn install_end_signals(&self) -> Result<()> {
        use std::io::IsTerminal;
        let mut ending = vec![signal_hook::consts::SIGTERM];
        let has_terminal = std::io::stdin().is_terminal()
            || std::io::stdout().is_terminal()
            || std::io::stderr().is_terminal();
        if !has_terminal {
            ending.push(signal_hook::consts::SIGHUP);
        }
        for signal in ending {
            for flag in [&self.stop, &self.hangup, &self.terminated] {
                signal_hook::flag::register(signal, Arc::clone(flag))
                    .context("installing the signal handlers")?;
            }
        }
        Ok(())
    }
}
