//! Keys to actions, and actions to the screen's state and the effects on the fit. Pure: no
//! terminal, no files; the loop in `mod.rs` carries out the [`Effect`]s.

use crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};

/// The four views, in key order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    Progress,
    Parameters,
    Residuals,
    Summary,
}

impl View {
    pub const ALL: [View; 4] = [
        View::Progress,
        View::Parameters,
        View::Residuals,
        View::Summary,
    ];

    pub fn title(self) -> &'static str {
        match self {
            View::Progress => "Progress",
            View::Parameters => "Parameters",
            View::Residuals => "Residuals",
            View::Summary => "Summary",
        }
    }

    fn index(self) -> usize {
        View::ALL.iter().position(|v| *v == self).unwrap_or(0)
    }
}

/// Whether the viewer is part of the fitting process (it can pause and stop it) or a
/// read-only `watch`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    Attached,
    ReadOnly,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    Show(View),
    NextView,
    PreviousView,
    NextCase,
    PreviousCase,
    NextSignal,
    PreviousSignal,
    TogglePause,
    Stop,
    Quit,
    ToggleHelp,
    /// Esc: closes the help or a message.
    Dismiss,
    /// `y`: confirms a pending question (stopping a watched fit).
    Confirm,
}

/// What the loop must do to the fit after an action.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Effect {
    None,
    TogglePause,
    /// Ask the fit to stop (finish the iteration, checkpoint, write outputs).
    Stop,
    /// Leave the viewer now.
    Quit,
    /// Ask the fit to stop and leave once its outputs are written.
    StopThenQuit,
    /// A watcher confirmed: send SIGINT to this pid (the fit in `run.lock`), if the user owns it.
    Interrupt(u32),
}

/// The action of a key press, if it has one. Key releases and repeats of other kinds give none.
pub fn action_for_key(key: KeyEvent) -> Option<Action> {
    if key.kind == KeyEventKind::Release {
        return None;
    }
    if key.modifiers.contains(KeyModifiers::CONTROL) {
        // Raw mode turns Ctrl-C into a key: it means what SIGINT means, stop the fit.
        return matches!(key.code, KeyCode::Char('c')).then_some(Action::Quit);
    }
    Some(match key.code {
        KeyCode::Char('1') => Action::Show(View::Progress),
        KeyCode::Char('2') => Action::Show(View::Parameters),
        KeyCode::Char('3') => Action::Show(View::Residuals),
        KeyCode::Char('4') => Action::Show(View::Summary),
        KeyCode::Tab => Action::NextView,
        KeyCode::BackTab => Action::PreviousView,
        KeyCode::Right | KeyCode::Char('l') | KeyCode::Char(']') => Action::NextCase,
        KeyCode::Left | KeyCode::Char('h') | KeyCode::Char('[') => Action::PreviousCase,
        KeyCode::Down | KeyCode::Char('j') => Action::NextSignal,
        KeyCode::Up | KeyCode::Char('k') => Action::PreviousSignal,
        KeyCode::Char('p') | KeyCode::Char(' ') => Action::TogglePause,
        KeyCode::Char('s') => Action::Stop,
        KeyCode::Char('q') => Action::Quit,
        KeyCode::Char('?') => Action::ToggleHelp,
        KeyCode::Esc => Action::Dismiss,
        KeyCode::Char('y') => Action::Confirm,
        _ => return None,
    })
}

/// The keys the footer lists for a view and mode: (key, what it does).
pub fn footer_keys(view: View, mode: Mode, is_run_over: bool) -> Vec<(&'static str, &'static str)> {
    let mut keys = vec![("1-4/Tab", "view")];
    match view {
        View::Residuals => {
            keys.push(("←→", "case"));
            keys.push(("↑↓", "signal"));
        }
        View::Parameters | View::Summary => keys.push(("↑↓", "scroll")),
        View::Progress => {}
    }
    match mode {
        Mode::Attached if is_run_over => keys.push(("q", "exit")),
        Mode::Attached => {
            keys.push(("p", "pause/resume"));
            keys.push(("s", "stop fit"));
            keys.push(("q", "stop+exit"));
        }
        Mode::ReadOnly if is_run_over => keys.push(("q", "quit")),
        Mode::ReadOnly => {
            keys.push(("s", "stop fit"));
            keys.push(("q", "quit"));
        }
    }
    keys.push(("?", "help"));
    keys
}

/// What the help overlay says, line by line.
pub fn help_lines(mode: Mode, holder_pid: Option<u32>) -> Vec<String> {
    let mut lines = vec![
        "1 2 3 4      Progress, Parameters, Residuals, Summary".to_string(),
        "Tab ⇧Tab     next / previous view".to_string(),
        "← → or h l   previous / next case (Residuals)".to_string(),
        "↑ ↓ or k j   previous / next signal (Residuals), scroll (Parameters, Summary)".to_string(),
    ];
    match mode {
        Mode::Attached => lines.extend([
            "p or space   pause / resume the fit (takes effect after this generation)".to_string(),
            "s            stop the fit: finish this iteration, write the checkpoint and"
                .to_string(),
            "             all outputs; the viewer stays open to show the summary".to_string(),
            "q or Ctrl-C  stop the fit the same way, then exit once the outputs are".to_string(),
            "             written (after the fit has ended: exit at once)".to_string(),
            "Closing the terminal does not stop the fit: it carries on without a screen."
                .to_string(),
        ]),
        Mode::ReadOnly => {
            lines.push("q            leave this viewer (the fit is not affected)".to_string());
            lines.push(
                "s then y     stop the fit (SIGINT to the pid in run.lock, if it is yours)"
                    .to_string(),
            );
            lines.push(
                "This viewer is read-only: it only reads the run directory. Pause the fit"
                    .to_string(),
            );
            lines.push(match holder_pid {
                Some(pid) => {
                    format!("from its own terminal; stop it from any shell: kill -INT {pid}")
                }
                None => "from its own terminal (no run.lock here names the fit's pid)".to_string(),
            });
        }
    }
    lines.push("? or Esc     close this help".to_string());
    lines
}

/// The screen's own state: which view, which case and signal, help, a message.
#[derive(Debug, Clone, PartialEq)]
pub struct Screen {
    pub view: View,
    pub case_idx: usize,
    pub signal_idx: usize,
    pub is_help_open: bool,
    pub mode: Mode,
    pub message: Option<String>,
    /// The user asked to leave once the fit has written its outputs.
    pub is_quit_requested: bool,
    pub is_stop_requested: bool,
    /// First line shown of the scrolling list of the Parameters and Summary views (the
    /// drawing clamps it to the list).
    pub scroll: usize,
    /// The pid in the run's `run.lock` (set by the loop from the state).
    pub holder_pid: Option<u32>,
    /// A watcher pressed `s`: the pid waiting for `y`.
    pub confirm_stop: Option<u32>,
}

impl Screen {
    pub fn new(mode: Mode) -> Self {
        Screen {
            view: View::Progress,
            case_idx: 0,
            signal_idx: 0,
            is_help_open: false,
            mode,
            message: None,
            is_quit_requested: false,
            is_stop_requested: false,
            scroll: 0,
            holder_pid: None,
            confirm_stop: None,
        }
    }

    /// Applies an action. `cases` are the run's cases and signals (for wrapping the
    /// selection); `is_run_over` is true once the fit has finished or failed.
    pub fn apply(
        &mut self,
        action: Action,
        cases: &[(String, Vec<String>)],
        is_run_over: bool,
    ) -> Effect {
        match action {
            Action::ToggleHelp => {
                self.is_help_open = !self.is_help_open;
                return Effect::None;
            }
            Action::Dismiss => {
                self.is_help_open = false;
                self.message = None;
                self.confirm_stop = None;
                return Effect::None;
            }
            _ => self.is_help_open = false,
        }
        if let Some(pid) = self.confirm_stop.take() {
            if action == Action::Confirm {
                self.message = None;
                return Effect::Interrupt(pid);
            }
            self.message = Some("not stopped".into());
            return Effect::None;
        }
        let read_only_note = match self.holder_pid {
            Some(pid) => format!(
                "read-only viewer: pause the fit in its own terminal; stop it with kill -INT {pid}"
            ),
            None => "read-only viewer: pause or stop the fit in its own terminal (no run.lock names its pid)".to_string(),
        };
        let old_view = self.view;
        match action {
            Action::Show(view) => self.view = view,
            Action::NextView => self.view = View::ALL[(self.view.index() + 1) % View::ALL.len()],
            Action::PreviousView => {
                self.view = View::ALL[(self.view.index() + View::ALL.len() - 1) % View::ALL.len()];
            }
            Action::NextSignal if matches!(self.view, View::Parameters | View::Summary) => {
                self.scroll = self.scroll.saturating_add(1);
            }
            Action::PreviousSignal if matches!(self.view, View::Parameters | View::Summary) => {
                self.scroll = self.scroll.saturating_sub(1);
            }
            Action::NextCase | Action::PreviousCase => {
                if !cases.is_empty() {
                    let n = cases.len();
                    let step = if action == Action::NextCase { 1 } else { n - 1 };
                    self.case_idx = (self.case_idx.min(n - 1) + step) % n;
                    self.signal_idx = 0;
                }
            }
            Action::NextSignal | Action::PreviousSignal => {
                if let Some((_, signals)) = cases.get(self.case_idx) {
                    let n = signals.len().max(1);
                    let step = if action == Action::NextSignal {
                        1
                    } else {
                        n - 1
                    };
                    self.signal_idx = (self.signal_idx.min(n - 1) + step) % n;
                }
            }
            Action::TogglePause => match self.mode {
                Mode::ReadOnly => self.message = Some(read_only_note),
                Mode::Attached if is_run_over => {
                    self.message = Some("the fit has ended; nothing to pause".into());
                }
                Mode::Attached => return Effect::TogglePause,
            },
            Action::Stop => match self.mode {
                Mode::ReadOnly if is_run_over => {
                    self.message = Some("the fit has ended already".into());
                }
                Mode::ReadOnly => match self.holder_pid {
                    Some(pid) => {
                        self.confirm_stop = Some(pid);
                        self.message = Some(format!(
                            "stop the fit? y sends kill -INT {pid} (it finishes the iteration and writes all outputs); any other key: no"
                        ));
                    }
                    None => self.message = Some(read_only_note),
                },
                Mode::Attached if is_run_over => {
                    self.message = Some("the fit has ended already".into());
                }
                Mode::Attached => {
                    self.is_stop_requested = true;
                    self.message = Some(
                        "stopping: finishing this iteration, then writing the checkpoint and outputs"
                            .into(),
                    );
                    return Effect::Stop;
                }
            },
            Action::Quit => match self.mode {
                Mode::ReadOnly => return Effect::Quit,
                Mode::Attached if is_run_over => return Effect::Quit,
                Mode::Attached => {
                    self.is_stop_requested = true;
                    self.is_quit_requested = true;
                    self.message = Some(
                        "stopping: finishing this iteration and writing all outputs, then exiting"
                            .into(),
                    );
                    return Effect::StopThenQuit;
                }
            },
            Action::ToggleHelp | Action::Dismiss | Action::Confirm => {}
        }
        if self.view != old_view {
            self.scroll = 0;
        }
        Effect::None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn press(code: KeyCode) -> Option<Action> {
        action_for_key(KeyEvent::from(code))
    }

    fn cases() -> Vec<(String, Vec<String>)> {
        vec![
            ("25 kW/m²".into(), vec!["mlr".into(), "hrr".into()]),
            ("50 kW/m²".into(), vec!["mlr".into()]),
        ]
    }

    #[test]
    fn number_keys_and_tab_choose_views() {
        let mut screen = Screen::new(Mode::ReadOnly);
        screen.apply(press(KeyCode::Char('3')).unwrap(), &cases(), false);
        assert_eq!(screen.view, View::Residuals);
        screen.apply(press(KeyCode::Tab).unwrap(), &cases(), false);
        assert_eq!(screen.view, View::Summary);
        screen.apply(press(KeyCode::Tab).unwrap(), &cases(), false);
        assert_eq!(screen.view, View::Progress);
        screen.apply(press(KeyCode::BackTab).unwrap(), &cases(), false);
        assert_eq!(screen.view, View::Summary);
    }

    #[test]
    fn arrows_move_between_cases_and_signals_and_wrap() {
        let mut screen = Screen::new(Mode::ReadOnly);
        screen.apply(press(KeyCode::Down).unwrap(), &cases(), false);
        assert_eq!((screen.case_idx, screen.signal_idx), (0, 1));
        screen.apply(press(KeyCode::Down).unwrap(), &cases(), false);
        assert_eq!((screen.case_idx, screen.signal_idx), (0, 0));
        screen.apply(press(KeyCode::Right).unwrap(), &cases(), false);
        assert_eq!((screen.case_idx, screen.signal_idx), (1, 0));
        screen.apply(press(KeyCode::Right).unwrap(), &cases(), false);
        assert_eq!(screen.case_idx, 0);
        screen.apply(press(KeyCode::Left).unwrap(), &cases(), false);
        assert_eq!(screen.case_idx, 1);
        // No cases known yet: nothing moves and nothing panics.
        screen.apply(Action::NextCase, &[], false);
        assert_eq!(screen.case_idx, 1);
    }

    #[test]
    fn a_read_only_viewer_explains_instead_of_pausing_or_stopping() {
        let mut screen = Screen::new(Mode::ReadOnly);
        assert_eq!(
            screen.apply(Action::TogglePause, &cases(), false),
            Effect::None
        );
        assert!(screen
            .message
            .as_deref()
            .unwrap_or("")
            .contains("read-only"));
        assert_eq!(screen.apply(Action::Stop, &cases(), false), Effect::None);
        assert!(!screen.is_stop_requested);
        assert_eq!(screen.apply(Action::Quit, &cases(), false), Effect::Quit);
    }

    #[test]
    fn quitting_an_attached_viewer_stops_the_fit_first() {
        let mut screen = Screen::new(Mode::Attached);
        assert_eq!(
            screen.apply(Action::TogglePause, &cases(), false),
            Effect::TogglePause
        );
        assert_eq!(
            screen.apply(Action::Quit, &cases(), false),
            Effect::StopThenQuit
        );
        assert!(screen.is_quit_requested && screen.is_stop_requested);
        // Once the fit has ended, q leaves at once.
        let mut screen = Screen::new(Mode::Attached);
        assert_eq!(screen.apply(Action::Quit, &cases(), true), Effect::Quit);
        assert_eq!(screen.apply(Action::Stop, &cases(), true), Effect::None);
    }

    #[test]
    fn ctrl_c_quits_and_releases_do_nothing() {
        let ctrl_c = KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL);
        assert_eq!(action_for_key(ctrl_c), Some(Action::Quit));
        let mut release = KeyEvent::from(KeyCode::Char('q'));
        release.kind = KeyEventKind::Release;
        assert_eq!(action_for_key(release), None);
        assert_eq!(press(KeyCode::Char('x')), None);
    }

    #[test]
    fn help_toggles_and_any_other_action_closes_it() {
        let mut screen = Screen::new(Mode::Attached);
        screen.apply(Action::ToggleHelp, &cases(), false);
        assert!(screen.is_help_open);
        screen.apply(Action::Show(View::Parameters), &cases(), false);
        assert!(!screen.is_help_open);
        assert_eq!(screen.view, View::Parameters);
        screen.apply(Action::ToggleHelp, &cases(), false);
        screen.apply(Action::Dismiss, &cases(), false);
        assert!(!screen.is_help_open);
    }

    #[test]
    fn every_footer_key_does_what_it_says() {
        let first = |label: &str| -> KeyCode {
            match label {
                "1-4/Tab" => KeyCode::Tab,
                "←→" => KeyCode::Right,
                "↑↓" => KeyCode::Down,
                other => KeyCode::Char(other.chars().next().unwrap()),
            }
        };
        for view in View::ALL {
            for mode in [Mode::Attached, Mode::ReadOnly] {
                for is_over in [false, true] {
                    for (key, _) in footer_keys(view, mode, is_over) {
                        assert!(press(first(key)).is_some(), "{key} in {view:?}/{mode:?}");
                    }
                }
            }
        }
    }

    #[test]
    fn a_watcher_stops_the_fit_only_after_confirming() {
        let mut screen = Screen::new(Mode::ReadOnly);
        // Without a pid in run.lock there is nothing to send.
        assert_eq!(screen.apply(Action::Stop, &cases(), false), Effect::None);
        assert!(screen.message.as_deref().unwrap().contains("no run.lock"));
        screen.holder_pid = Some(4242);
        assert_eq!(screen.apply(Action::Stop, &cases(), false), Effect::None);
        assert!(screen
            .message
            .as_deref()
            .unwrap()
            .contains("y sends kill -INT 4242"));
        // Any other action cancels; so does Esc.
        assert_eq!(
            screen.apply(Action::NextView, &cases(), false),
            Effect::None
        );
        assert_eq!(screen.apply(Action::Confirm, &cases(), false), Effect::None);
        screen.apply(Action::Stop, &cases(), false);
        screen.apply(Action::Dismiss, &cases(), false);
        assert_eq!(screen.apply(Action::Confirm, &cases(), false), Effect::None);
        screen.apply(Action::Stop, &cases(), false);
        assert_eq!(
            screen.apply(Action::Confirm, &cases(), false),
            Effect::Interrupt(4242)
        );
        // A finished run has nothing to stop.
        assert_eq!(screen.apply(Action::Stop, &cases(), true), Effect::None);
        assert_eq!(screen.confirm_stop, None);
    }

    #[test]
    fn arrows_scroll_the_parameters_and_summary_and_a_new_view_starts_at_the_top() {
        let mut screen = Screen::new(Mode::Attached);
        screen.apply(Action::Show(View::Parameters), &cases(), false);
        screen.apply(Action::NextSignal, &cases(), false);
        screen.apply(Action::NextSignal, &cases(), false);
        assert_eq!(screen.scroll, 2);
        screen.apply(Action::PreviousSignal, &cases(), false);
        assert_eq!(screen.scroll, 1);
        screen.apply(Action::Show(View::Summary), &cases(), false);
        assert_eq!(screen.scroll, 0);
    }
}
