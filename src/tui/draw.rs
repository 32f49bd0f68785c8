//! The screens: a pure function of the viewer state, the screen state, the look and the time.
//! Nothing here reads files or the terminal; tests draw into ratatui's `TestBackend`.
//!
//! Nothing relies on colour alone: the status is a word, the selected tab and case are
//! bracketed and marked, strong correlations are bracketed, and each curve has its own glyph,
//! named in the chart's title.

use std::time::SystemTime;

use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Chart, Clear, Dataset, GraphType, Paragraph, Wrap};
use ratatui::Frame;

use crate::headless::{duration_words, interval_text, significant};

use super::input::{footer_keys, help_lines, Mode, Screen, View};
use super::state::{position_between, ParameterRow, Status, ViewerState, STRONG_CORRELATION};

/// Colours, or none (NO_COLOR): every style below degrades to a modifier or to nothing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Look {
    pub is_colour: bool,
}

impl Look {
    /// Colour unless `NO_COLOR` is set to a non-empty value (no-color.org).
    pub fn from_env() -> Self {
        Look {
            is_colour: std::env::var_os("NO_COLOR").is_none_or(|v| v.is_empty()),
        }
    }

    fn fg(self, colour: Color) -> Style {
        if self.is_colour {
            Style::default().fg(colour)
        } else {
            Style::default()
        }
    }

    fn strong(self) -> Style {
        self.fg(Color::Yellow).add_modifier(Modifier::BOLD)
    }

    fn warn(self) -> Style {
        self.fg(Color::Red).add_modifier(Modifier::BOLD)
    }

    fn dim(self) -> Style {
        self.fg(Color::DarkGray)
    }

    fn accent(self) -> Style {
        self.fg(Color::Cyan)
    }

    fn selected(self) -> Style {
        Style::default().add_modifier(Modifier::REVERSED | Modifier::BOLD)
    }

    fn status(self, status: Status) -> Style {
        let colour = match status {
            Status::Running => Color::Green,
            Status::Paused | Status::Stopping | Status::Waiting => Color::Yellow,
            Status::Finished => Color::Cyan,
            Status::Failed | Status::Stale => Color::Red,
        };
        self.fg(colour).add_modifier(Modifier::BOLD)
    }
}

/// Everything one frame is drawn from.
pub struct Scene<'a> {
    pub state: &'a ViewerState,
    pub screen: &'a Screen,
    pub look: Look,
    pub now: SystemTime,
}

/// Draws the whole screen.
pub fn draw(frame: &mut Frame, scene: &Scene) {
    let area = frame.area();
    let footer = footer_line(scene);
    let footer_height = if footer.width() as u16 > area.width {
        2
    } else {
        1
    };
    let message_height = u16::from(scene.screen.message.is_some());
    let [header, tabs, body, message, footer_area] = Layout::vertical([
        Constraint::Length(1),
        Constraint::Length(1),
        Constraint::Min(3),
        Constraint::Length(message_height),
        Constraint::Length(footer_height),
    ])
    .areas(area);
    frame.render_widget(Paragraph::new(header_line(scene)), header);
    frame.render_widget(Paragraph::new(tabs_line(scene)), tabs);
    match scene.screen.view {
        View::Progress => draw_progress(frame, body, scene),
        View::Parameters => draw_parameters(frame, body, scene),
        View::Residuals => draw_residuals(frame, body, scene),
        View::Summary => draw_summary(frame, body, scene),
    }
    if let Some(text) = &scene.screen.message {
        frame.render_widget(
            Paragraph::new(Line::from(Span::styled(
                format!(" {text}"),
                scene.look.strong(),
            ))),
            message,
        );
    }
    frame.render_widget(
        Paragraph::new(footer).wrap(Wrap { trim: false }),
        footer_area,
    );
    if scene.screen.is_help_open {
        draw_help(frame, area, scene);
    }
}

fn header_line<'a>(scene: &Scene) -> Line<'a> {
    let state = scene.state;
    let status = state.status(scene.now, scene.screen.is_stop_requested);
    let title = state
        .info
        .as_ref()
        .map(|i| i.title.clone())
        .or_else(|| state.summary.as_ref().and_then(|s| s.title.clone()))
        .unwrap_or_else(|| "(no started line yet)".into());
    let mode = match scene.screen.mode {
        Mode::Attached => "",
        Mode::ReadOnly => "(read-only) ",
    };
    let time_left = match (status, state.time_left_s()) {
        (Status::Running, Some(left)) => format!("≈ {} to go  ", duration_text(left)),
        _ => String::new(),
    };
    Line::from(vec![
        Span::styled(format!(" [{}] ", status.label()), scene.look.status(status)),
        Span::styled(time_left, scene.look.strong()),
        Span::styled(mode, scene.look.dim()),
        Span::styled(title, Style::default().add_modifier(Modifier::BOLD)),
    ])
}

fn tabs_line<'a>(scene: &Scene) -> Line<'a> {
    let mut spans = vec![Span::raw(" ")];
    for (i, view) in View::ALL.iter().enumerate() {
        let label = format!("{} {}", i + 1, view.title());
        if *view == scene.screen.view {
            spans.push(Span::styled(format!("[{label}]"), scene.look.selected()));
        } else {
            spans.push(Span::raw(format!(" {label} ")));
        }
        spans.push(Span::raw(" "));
    }
    Line::from(spans)
}

fn footer_line<'a>(scene: &Scene) -> Line<'a> {
    let mut spans = vec![Span::raw(" ")];
    for (key, what) in footer_keys(scene.screen.view, scene.screen.mode, scene.state.is_over()) {
        spans.push(Span::styled(
            key,
            scene.look.accent().add_modifier(Modifier::BOLD),
        ));
        spans.push(Span::raw(format!(" {what}  ")));
    }
    if scene.screen.mode == Mode::ReadOnly {
        spans.push(Span::styled("(read-only)", scene.look.dim()));
    }
    Line::from(spans)
}

/// A duration in words: 45 s, 12 min 05 s, 3 h 07 min.
pub fn duration_text(seconds: f64) -> String {
    duration_words(seconds)
}

fn label_value<'a>(label: &str, value: String, look: Look) -> Line<'a> {
    Line::from(vec![
        Span::styled(format!("{label:<16}"), look.dim()),
        Span::raw(value),
    ])
}

fn progress_lines<'a>(scene: &Scene) -> Vec<Line<'a>> {
    let state = scene.state;
    let look = scene.look;
    let status = state.status(scene.now, scene.screen.is_stop_requested);
    let mut lines = Vec::new();
    let phase = match (&state.posterior, state.finished.is_some()) {
        (Some(p), false) => format!(
            " (posterior sample, step {}/{}, {})",
            p.step,
            p.steps,
            p.acceptance_text()
        ),
        _ => state
            .latest
            .as_ref()
            .map(|l| match l.phase.as_str() {
                "" => format!(" (iteration {})", l.iter),
                phase => format!(" ({phase} phase, iteration {})", l.iter),
            })
            .unwrap_or_default(),
    };
    lines.push(Line::from(vec![
        Span::styled(format!("{:<16}", "status"), look.dim()),
        Span::styled(status.label(), look.status(status)),
        Span::raw(phase),
    ]));
    lines.push(label_value(
        "best objective",
        state
            .best_cost()
            .map_or_else(|| "-".into(), |c| significant(c, 6)),
        look,
    ));
    let budget = state.info.as_ref().map(|i| i.max_evaluations).unwrap_or(0);
    let evaluations = state.evaluations();
    lines.push(label_value(
        "evaluations",
        match evaluations {
            Some(n) if budget > 0 => format!("{n} (budget {budget} + local refinement)"),
            Some(n) => n.to_string(),
            None => "-".into(),
        },
        look,
    ));
    lines.push(label_value(
        "rate",
        state
            .evaluations_per_s()
            .map_or_else(|| "-".into(), |r| format!("{r:.1} evaluations/s")),
        look,
    ));
    let elapsed = state.elapsed_s();
    lines.push(label_value(
        "elapsed",
        elapsed.map_or_else(|| "-".into(), duration_text),
        look,
    ));
    if let Some(sample) = state.running_sample() {
        // While the posterior sample runs, the fit's budget is spent: the sample's progress
        // takes its place.
        lines.push(label_value(
            "sample",
            format!(
                "step {}/{}, {}, {} elapsed",
                sample.step,
                sample.steps,
                sample.acceptance_text(),
                duration_text(sample.elapsed_s)
            ),
            look,
        ));
        lines.push(label_value(
            "time left",
            state.sample_time_left_s().map_or_else(
                || "-".into(),
                |left| {
                    format!(
                        "≈ {} for the sample's {} steps left",
                        duration_text(left),
                        sample.steps.saturating_sub(sample.step)
                    )
                },
            ),
            look,
        ));
    } else if !state.is_over() {
        let mut left = Vec::new();
        if budget > 0 {
            left.push(format!(
                "{} evaluations",
                budget.saturating_sub(evaluations.unwrap_or(0))
            ));
        }
        if let (Some(limit), Some(elapsed)) =
            (state.info.as_ref().and_then(|i| i.time_budget_s), elapsed)
        {
            left.push(duration_text((limit - elapsed).max(0.0)));
        }
        lines.push(label_value(
            "budget left",
            if left.is_empty() {
                "-".into()
            } else {
                left.join(" or ")
            },
            look,
        ));
        lines.push(label_value(
            "time left",
            state.time_left_s().map_or_else(
                || "-".into(),
                |left| {
                    format!(
                        "≈ {} at the current rate (then local refinement, if any)",
                        duration_text(left)
                    )
                },
            ),
            look,
        ));
    }
    if !state.is_over() && scene.screen.mode == Mode::ReadOnly {
        lines.push(label_value(
            "stop it",
            match state.holder_pid {
                Some(pid) => format!("kill -INT {pid}   (or s, then y)"),
                None => "from its own terminal (no run.lock names its pid)".into(),
            },
            look,
        ));
    }
    lines.push(label_value(
        "checkpoint",
        match (state.since_checkpoint(scene.now), state.last_checkpoint) {
            (Some(age), Some((iter, _, _))) => {
                format!(
                    "{} ago (iteration {iter})",
                    duration_text(age.as_secs_f64())
                )
            }
            (Some(age), None) => format!("{} ago", duration_text(age.as_secs_f64())),
            (None, Some((iter, _, _))) => format!("at iteration {iter} (no checkpoint file here)"),
            (None, None) => "none yet".into(),
        },
        look,
    ));
    if let Some(age) = state.since_progress(scene.now) {
        if !state.is_over() {
            lines.push(label_value(
                "last line",
                format!("{} ago", duration_text(age.as_secs_f64())),
                look,
            ));
        }
    }
    if state.n_failures > 0 {
        lines.push(label_value(
            "failed candidates",
            format!(
                "{} (penalised): {}",
                state.n_failures,
                state.last_failure.clone().unwrap_or_default()
            ),
            look,
        ));
    }
    if let Some(ending) = &state.finished {
        lines.push(label_value("ended", ending.reason.clone(), look));
    }
    if let Some(message) = &state.failed {
        lines.push(Line::from(vec![
            Span::styled(format!("{:<16}", "failed"), look.warn()),
            Span::raw(message.clone()),
        ]));
    }
    if status == Status::Stale {
        lines.push(Line::from(Span::styled(
            "no progress for a while: the fitting process may have been killed (resume it with fit --resume)",
            look.warn(),
        )));
    }
    for note in state.notes() {
        lines.push(Line::from(Span::styled(
            format!("cannot show: {note}"),
            look.warn(),
        )));
    }
    lines
}

fn draw_progress(frame: &mut Frame, area: Rect, scene: &Scene) {
    let lines = progress_lines(scene);
    let (stats_area, chart_area) = if area.width >= 110 {
        let stats_width = if area.width >= 160 { 72 } else { 52 };
        let [a, b] =
            Layout::horizontal([Constraint::Length(stats_width), Constraint::Min(20)]).areas(area);
        (a, b)
    } else {
        let height = (lines.len() as u16 + 2).min(area.height.saturating_sub(6).max(3));
        let [a, b] = Layout::vertical([Constraint::Length(height), Constraint::Min(3)]).areas(area);
        (a, b)
    };
    frame.render_widget(
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .block(Block::bordered().title(" Fit ")),
        stats_area,
    );
    draw_objective_chart(frame, chart_area, scene);
}

fn draw_objective_chart(frame: &mut Frame, area: Rect, scene: &Scene) {
    let by_evaluations = scene.state.has_evaluation_counts();
    let (x_title, title) = if by_evaluations {
        (
            "evaluations",
            " Best objective against evaluations (log scale) ",
        )
    } else {
        (
            "iterations",
            " Best objective against iterations (log scale; this run has no evaluation counts) ",
        )
    };
    let block = Block::bordered().title(title);
    let points: Vec<(f64, f64)> = scene
        .state
        .history
        .iter()
        .filter(|p| p.best_cost > 0.0 && p.best_cost.is_finite())
        .map(|p| {
            let x = if by_evaluations {
                p.evaluations
            } else {
                p.iter
            };
            (x as f64, p.best_cost.log10())
        })
        .collect();
    if points.is_empty() {
        frame.render_widget(
            Paragraph::new("waiting for the first iteration").block(block),
            area,
        );
        return;
    }
    // Counts are never negative: a single point widens to the right only.
    let (x_min, x_max) = span(points.iter().map(|p| p.0));
    let (x_min, x_max) = (x_min.max(0.0), x_max.max(x_min.max(0.0) + 1.0));
    let (y_min, y_max) = span(points.iter().map(|p| p.1));
    let (y_min, y_max) = (y_min.floor(), y_max.ceil().max(y_min.floor() + 1.0));
    let y_labels: Vec<Line> = [y_min, (y_min + y_max) / 2.0, y_max]
        .iter()
        .map(|y| Line::from(significant(10f64.powf(*y), 3)))
        .collect();
    let dataset = Dataset::default()
        .marker(Marker::Braille)
        .graph_type(GraphType::Line)
        .style(scene.look.strong())
        .data(&points);
    let chart = Chart::new(vec![dataset])
        .block(block)
        .legend_position(None)
        .x_axis(
            Axis::default()
                .title(x_title)
                .bounds([x_min, x_max])
                .labels(vec![
                    Line::from(format!("{x_min:.0}")),
                    Line::from(format!("{x_max:.0}")),
                ]),
        )
        .y_axis(Axis::default().bounds([y_min, y_max]).labels(y_labels));
    frame.render_widget(chart, area);
}

/// Means of `ys` in `n_bins` equal bins of `xs` between `x_min` and `x_max`, at each bin's
/// mean x; empty bins and non-finite points are left out.
pub fn binned_means(
    xs: &[f64],
    ys: &[f64],
    x_min: f64,
    x_max: f64,
    n_bins: usize,
) -> Vec<(f64, f64)> {
    let n_bins = n_bins.max(1);
    let mut sums = vec![(0.0, 0.0, 0usize); n_bins];
    let width = (x_max - x_min) / n_bins as f64;
    for (x, y) in xs.iter().zip(ys) {
        if !(x.is_finite() && y.is_finite()) || width <= 0.0 {
            continue;
        }
        let bin = (((x - x_min) / width) as usize).min(n_bins - 1);
        sums[bin].0 += x;
        sums[bin].1 += y;
        sums[bin].2 += 1;
    }
    sums.into_iter()
        .filter(|s| s.2 > 0)
        .map(|(sx, sy, n)| (sx / n as f64, sy / n as f64))
        .collect()
}

/// Smallest and largest finite value, widened when they are equal.
fn span(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    if hi - lo <= f64::EPSILON * lo.abs().max(1.0) {
        return (lo - 0.5, hi + 0.5);
    }
    (lo, hi)
}

/// A bar between the bounds: `─` the range, `═` the 95 % interval, `●` the best value.
pub fn bound_bar(row: &ParameterRow, width: usize) -> String {
    let width = width.max(3);
    let mut cells = vec!['─'; width];
    let cell = |p: f64| ((p * (width - 1) as f64).round() as usize).min(width - 1);
    if let Some((a, b)) = row.interval_95 {
        let pa = position_between(a, row.lower, row.upper, row.log_scale);
        let pb = position_between(b, row.lower, row.upper, row.log_scale);
        if let (Some(pa), Some(pb)) = (pa, pb) {
            for c in &mut cells[cell(pa)..=cell(pb).max(cell(pa))] {
                *c = '═';
            }
        }
    }
    if let Some(p) = row
        .value
        .and_then(|v| position_between(v, row.lower, row.upper, row.log_scale))
    {
        cells[cell(p)] = '●';
    }
    format!("[{}]", cells.into_iter().collect::<String>())
}

/// Words for a signal's name in the run directory (`mlr` → `mass loss rate`); an unknown
/// name is shown as it is.
pub fn signal_title(signal: &str) -> String {
    if let Some(depth) = signal
        .strip_prefix("in_depth_temperature_")
        .and_then(|d| d.strip_suffix("mm"))
    {
        return format!("temperature {depth} mm deep");
    }
    match signal {
        "mlr" => "mass loss rate",
        "hrr" => "heat release rate",
        "mass" => "specimen mass",
        "ignition_time" => "time to ignition",
        "surface_temperature" => "surface temperature",
        "back_temperature" => "back-face temperature",
        "mass_fraction" => "TGA mass fraction",
        "dsc_heat_flow" => "DSC heat flow",
        "mcc_hrr" => "MCC heat release rate",
        other => other,
    }
    .to_string()
}

/// A signal's name in a few characters, for lists (`ignition_time` → `t ignition`).
pub fn signal_short(signal: &str) -> String {
    if let Some(depth) = signal
        .strip_prefix("in_depth_temperature_")
        .and_then(|d| d.strip_suffix("mm"))
    {
        return format!("T {depth} mm");
    }
    match signal {
        "mlr" => "MLR",
        "hrr" => "HRR",
        "mass" => "mass",
        "ignition_time" => "t ignition",
        "surface_temperature" => "T surface",
        "back_temperature" => "T back face",
        "mass_fraction" => "TGA mass",
        "dsc_heat_flow" => "DSC",
        "mcc_hrr" => "MCC HRR",
        other => other,
    }
    .to_string()
}

/// What a σ source means, for a narrow chart's legend.
fn sigma_words_short(source: &str) -> &'static str {
    match source {
        "repeats" => "± σ of repeats",
        "sigma" => "± stated noise σ",
        "peak" | "rise" => "no band: σ is a scale",
        _ => "no band",
    }
}

/// What a σ source means, for the chart's legend.
fn sigma_words(source: &str) -> &'static str {
    match source {
        "repeats" => "± σ of the repeat tests",
        "sigma" => "± the job's stated noise σ",
        "peak" => "σ here is the peak scale of a single test, not a measured spread: no band",
        "rise" => "σ here is the rise of a single test, not a measured spread: no band",
        _ => "σ of unknown origin: no band",
    }
}

/// Splits `text` into lines of at most `width` characters at spaces (a word longer than the
/// width is cut).
pub fn wrap_words(text: &str, width: usize) -> Vec<String> {
    let width = width.max(8);
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split(' ') {
        let mut word = word.to_string();
        while word.chars().count() > width {
            if !line.is_empty() {
                lines.push(std::mem::take(&mut line));
            }
            let head: String = word.chars().take(width).collect();
            word = word.chars().skip(width).collect();
            lines.push(head);
        }
        let needed = line.chars().count() + usize::from(!line.is_empty()) + word.chars().count();
        if needed > width && !line.is_empty() {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(&word);
    }
    if !line.is_empty() || lines.is_empty() {
        lines.push(line);
    }
    lines
}

/// The part of a list that fits: items (each some lines) from `first`, whole, with a line
/// saying what is above and below. Returns the lines and the first item actually shown
/// (`first` clamped so the last page is full).
pub fn scroll_window<'a>(
    items: &[Vec<Line<'a>>],
    height: usize,
    first: usize,
    what: &str,
    look: Look,
) -> (Vec<Line<'a>>, usize) {
    let total: usize = items.iter().map(Vec::len).sum();
    if total <= height || items.is_empty() {
        return (items.iter().flatten().cloned().collect(), 0);
    }
    // Room for the two hint lines.
    let room = height.saturating_sub(2).max(1);
    // The largest first item whose tail still fills the room.
    let mut last_first = items.len() - 1;
    let mut tail = items[last_first].len();
    while last_first > 0 && tail + items[last_first - 1].len() <= room {
        last_first -= 1;
        tail += items[last_first].len();
    }
    let first = first.min(last_first);
    let mut shown = Vec::new();
    let mut used = 0;
    let mut end = first;
    while end < items.len() && (used + items[end].len() <= room || end == first) {
        used += items[end].len();
        end += 1;
    }
    let n = items.len();
    shown.push(Line::from(Span::styled(
        if first > 0 {
            format!("↑ {first} more above · {what} {}–{end} of {n}", first + 1)
        } else {
            format!("{what} {}–{end} of {n}", first + 1)
        },
        look.dim(),
    )));
    for item in &items[first..end] {
        for line in item {
            if shown.len() < height.saturating_sub(1) {
                shown.push(line.clone());
            }
        }
    }
    shown.push(Line::from(Span::styled(
        if end < n {
            format!("↓ {} more below (↑↓ to scroll)", n - end)
        } else {
            "(end of the list; ↑ to scroll back)".to_string()
        },
        look.strong(),
    )));
    (shown, first)
}

fn draw_parameters(frame: &mut Frame, area: Rect, scene: &Scene) {
    let look = scene.look;
    let rows = scene.state.parameter_rows();
    let is_final = scene
        .state
        .summary
        .as_ref()
        .is_some_and(|s| s.parameters.is_some());
    let title = if is_final {
        " Parameters: final values, 95 % intervals, warnings "
    } else {
        " Parameters: current best (intervals come when the fit ends) "
    };
    let block = Block::bordered().title(title);
    if rows.is_empty() {
        frame.render_widget(
            Paragraph::new("no parameters yet (waiting for the started line)").block(block),
            area,
        );
        return;
    }
    let inner_width = area.width.saturating_sub(2) as usize;
    let inner_height = area.height.saturating_sub(2) as usize;
    let label_width = rows
        .iter()
        .flat_map(|r| [significant(r.lower, 3), significant(r.upper, 3)])
        .map(|l| l.chars().count())
        .max()
        .unwrap_or(1);
    let legend = Line::from(Span::styled(
        "● best value   ═ 95 % interval   [ ] the bounds   ! a warning",
        look.dim(),
    ));
    let items: Vec<Vec<Line>> = rows
        .iter()
        .map(|row| parameter_item(row, is_final, inner_width, label_width, look))
        .collect();
    let (mut lines, _) = scroll_window(
        &items,
        inner_height.saturating_sub(1),
        scene.screen.scroll,
        "parameters",
        look,
    );
    lines.insert(0, legend);
    frame.render_widget(Paragraph::new(lines).block(block), area);
}

/// One parameter's lines: label, value, interval; the full path and what it is; the bar;
/// warnings.
fn parameter_item<'a>(
    row: &ParameterRow,
    is_final: bool,
    inner_width: usize,
    label_width: usize,
    look: Look,
) -> Vec<Line<'a>> {
    let value = row.value.map_or_else(|| "-".into(), |v| significant(v, 5));
    let unit = if row.unit.is_empty() || row.unit == "–" {
        String::new()
    } else {
        format!(" {}", row.unit)
    };
    let interval = row.interval_95.map_or_else(
        || {
            if is_final {
                "95 %: undetermined".into()
            } else {
                String::new()
            }
        },
        |(a, b)| format!("95 %: {}", interval_text(a, b)),
    );
    let mut lines = vec![Line::from(vec![
        Span::styled(
            row.label.clone(),
            Style::default().add_modifier(Modifier::BOLD),
        ),
        Span::raw(" = "),
        Span::styled(value, look.strong()),
        Span::raw(format!("{unit}  {interval}")),
    ])];
    let detail = if row.meaning.is_empty() || row.meaning == row.name {
        row.name.clone()
    } else {
        format!("{}: {}", row.name, row.meaning)
    };
    for text in wrap_words(&detail, inner_width.saturating_sub(2)) {
        lines.push(Line::from(Span::styled(format!("  {text}"), look.dim())));
    }
    let lower = significant(row.lower, 3);
    let upper = significant(row.upper, 3);
    let scale = if row.log_scale { " log" } else { "" };
    let bar_width = inner_width
        .saturating_sub(2 * label_width + 8 + scale.len())
        .min(60);
    lines.push(Line::from(format!(
        "  {lower:>label_width$} {} {upper}{scale}",
        bound_bar(row, bar_width)
    )));
    let mut warnings: Vec<String> = row.warnings.clone();
    if warnings.is_empty() {
        if row.is_at_bound {
            warnings.push("at a bound".into());
        }
        if row.is_strongly_correlated {
            warnings.push("strongly correlated".into());
        }
        if is_final && row.is_poorly_determined {
            warnings.push("poorly determined".into());
        }
    }
    for warning in warnings {
        for text in wrap_words(&format!("! {warning}"), inner_width.saturating_sub(2)) {
            lines.push(Line::from(Span::styled(format!("  {text}"), look.warn())));
        }
    }
    lines
}

fn draw_residuals(frame: &mut Frame, area: Rect, scene: &Scene) {
    let look = scene.look;
    let state = scene.state;
    let cases = state.cases();
    let shares = state.case_shares();
    let list_width: u16 = if area.width >= 120 { 34 } else { 26 };
    let [list_area, charts_area] =
        Layout::horizontal([Constraint::Length(list_width), Constraint::Min(20)]).areas(area);
    let case_idx = scene.screen.case_idx.min(cases.len().saturating_sub(1));
    let signal_idx = cases.get(case_idx).map_or(0, |(_, s)| {
        scene.screen.signal_idx.min(s.len().saturating_sub(1))
    });
    let inner = list_width.saturating_sub(2) as usize;
    let mut items: Vec<Vec<Line>> = Vec::new();
    for (i, (case, signals)) in cases.iter().enumerate() {
        let mut item = Vec::new();
        let share = shares.iter().find(|s| &s.case == case).map(|s| s.share);
        let is_selected = i == case_idx;
        item.push(Line::from(vec![
            Span::raw(if is_selected { "› " } else { "  " }),
            Span::styled(
                case.clone(),
                if is_selected {
                    look.selected()
                } else {
                    Style::default()
                },
            ),
            Span::raw(share.map_or_else(String::new, |s| format!(" {:>3.0} %", 100.0 * s))),
        ]));
        if let Some(share) = share {
            let width = inner.saturating_sub(4);
            let filled = ((share * width as f64).round() as usize).min(width);
            item.push(Line::from(format!(
                "  {}{}",
                "█".repeat(filled),
                "·".repeat(width - filled)
            )));
        }
        if is_selected {
            for (j, signal) in signals.iter().enumerate() {
                let cost = state
                    .part_cost(case, signal)
                    .map_or_else(String::new, |c| format!(" {}", significant(c, 3)));
                let (marker, style) = if j == signal_idx {
                    ("»", look.selected())
                } else {
                    (" ", Style::default())
                };
                item.push(Line::from(vec![
                    Span::raw(format!("  {marker} ")),
                    Span::styled(signal_short(signal), style),
                    Span::styled(cost, look.dim()),
                ]));
            }
        }
        items.push(item);
    }
    let list_height = list_area.height.saturating_sub(4) as usize;
    // The selected case is kept in view: the window starts at it when the list overflows.
    let (mut lines, _) = scroll_window(&items, list_height, case_idx, "cases", look);
    let model_words = match (&state.curve_index, state.curves_are_live()) {
        (Some(index), true) => format!(
            "live: best at iter. {}",
            index
                .iteration
                .map_or_else(|| "?".into(), |i| i.to_string())
        ),
        (Some(_), false) => "model: the final one".to_string(),
        (None, _) if state.is_over() => "model: as in cases/".to_string(),
        (None, _) => "model: none yet".to_string(),
    };
    lines.insert(0, Line::from(Span::styled(model_words, look.strong())));
    lines.insert(1, Line::from(Span::styled("share · part cost", look.dim())));
    if cases.is_empty() {
        lines.push(Line::from("no cases yet"));
    }
    frame.render_widget(
        Paragraph::new(lines).block(Block::bordered().title(" Cases ")),
        list_area,
    );
    let Some((case, signals)) = cases.get(case_idx) else {
        frame.render_widget(Block::bordered().title(" Fit "), charts_area);
        return;
    };
    let signal = signals.get(signal_idx).cloned().unwrap_or_default();
    let entry = state.curve_entry(case, &signal);
    let unit = entry.map(|e| e.unit.clone()).unwrap_or_default();
    let with_unit = |text: String| {
        if unit.is_empty() {
            text
        } else {
            format!("{text} ({unit})")
        }
    };
    let is_narrow = charts_area.width < 100;
    let stamp = match (&state.curve_index, state.curves_are_live()) {
        (Some(index), true) if !is_narrow => format!(
            " · best model so far (iteration {})",
            index
                .iteration
                .map_or_else(|| "?".into(), |i| i.to_string())
        ),
        (Some(_), false) if !is_narrow => " · final model".to_string(),
        _ => String::new(),
    };
    let heading = format!(
        " {}{stamp} ",
        with_unit(format!("{case} · {}", signal_title(&signal)))
    );
    let Some(curve) = state.curve(case, &signal) else {
        let text = if state.is_over() {
            format!("no curve file for {case} / {signal} in cases/ (this run did not write one)")
        } else {
            "the model curves appear at the first checkpoint with a better model (cases/*.csv); the shares on the left are live"
                .into()
        };
        frame.render_widget(
            Paragraph::new(text)
                .wrap(Wrap { trim: false })
                .block(Block::bordered().title(heading)),
            charts_area,
        );
        return;
    };
    if curve.time_s.len() == 1 {
        draw_scalar(frame, charts_area, scene, curve, &unit, heading);
        return;
    }
    let [top, bottom] = Layout::vertical([Constraint::Percentage(62), Constraint::Percentage(38)])
        .areas(charts_area);
    // Curves are averaged into bins of half a cell (the chart's resolution in braille), so
    // noise in the data does not fill the chart and the band reads as a band.
    let n_bins = 2 * top.width.saturating_sub(12).max(10) as usize;
    let (t_min, t_max) = span(curve.time_s.iter().copied());
    let pairs = |ys: &[f64], n: usize| binned_means(&curve.time_s, ys, t_min, t_max, n);
    let measured = pairs(&curve.measured, n_bins);
    let model = pairs(&curve.model, n_bins);
    let sigma_source = entry.map(|e| e.sigma_source.as_str()).unwrap_or("");
    let has_band =
        !curve.sigma.is_empty() && crate::run::curves::is_measurement_spread(sigma_source);
    // The band is a measured spread: drawn smoother than the data (a quarter of the bins) and
    // always inside the range, so no line of it runs along the chart's edge.
    let (upper, lower) = if has_band {
        let shifted = |sign: f64| -> Vec<f64> {
            curve
                .measured
                .iter()
                .zip(&curve.sigma)
                .map(|(m, s)| m + sign * s)
                .collect()
        };
        (
            pairs(&shifted(1.0), n_bins / 4),
            pairs(&shifted(-1.0), n_bins / 4),
        )
    } else {
        (Vec::new(), Vec::new())
    };
    let (x_min, x_max) = span(measured.iter().map(|p| p.0));
    // The range follows the measured and model curves (and a drawn band).
    let (y_min, y_max) = span(
        measured
            .iter()
            .chain(&model)
            .chain(&upper)
            .chain(&lower)
            .map(|p| p.1),
    );
    let margin = 0.05 * (y_max - y_min);
    let (y_min, y_max) = (y_min - margin, y_max + margin);
    let mut datasets = Vec::new();
    for band in [&upper, &lower] {
        if !band.is_empty() {
            datasets.push(
                Dataset::default()
                    .marker(Marker::Braille)
                    .graph_type(GraphType::Line)
                    .style(look.dim())
                    .data(band),
            );
        }
    }
    datasets.push(
        Dataset::default()
            .marker(Marker::Dot)
            .graph_type(GraphType::Scatter)
            .style(look.accent())
            .data(&measured),
    );
    datasets.push(
        Dataset::default()
            .marker(Marker::HalfBlock)
            .graph_type(GraphType::Line)
            .style(look.strong())
            .data(&model),
    );
    let words = if is_narrow {
        sigma_words_short
    } else {
        sigma_words
    };
    let band_words = if curve.sigma.is_empty() {
        "no σ in the file".to_string()
    } else if has_band {
        format!("⠒ measured {}", words(sigma_source))
    } else {
        words(sigma_source).to_string()
    };
    let legend = Line::from(Span::styled(
        format!(" • measured   ▀ model   {band_words}"),
        look.dim(),
    ));
    let time_axis = |title: &'static str| {
        Axis::default()
            .title(title)
            .bounds([x_min, x_max])
            .labels(vec![
                Line::from(format!("{x_min:.0}")),
                Line::from(format!("{:.0}", (x_min + x_max) / 2.0)),
                Line::from(format!("{x_max:.0}")),
            ])
    };
    let chart_block = Block::bordered().title(heading).title_bottom(legend);
    let y_title = if unit.is_empty() {
        "unit not recorded".to_string()
    } else {
        unit.clone()
    };
    let chart = Chart::new(datasets)
        .block(chart_block)
        .legend_position(None)
        .x_axis(time_axis("time (s)"))
        .y_axis(
            Axis::default()
                .title(y_title)
                .bounds([y_min, y_max])
                .labels(vec![
                    Line::from(significant(y_min, 3)),
                    Line::from(significant((y_min + y_max) / 2.0, 3)),
                    Line::from(significant(y_max, 3)),
                ]),
        );
    frame.render_widget(chart, top);
    let residuals: Vec<(f64, f64)> = curve
        .time_s
        .iter()
        .zip(&curve.residual)
        .filter(|(t, r)| t.is_finite() && r.is_finite() && (x_min..=x_max).contains(*t))
        .map(|(t, r)| (*t, *r))
        .collect();
    if residuals.is_empty() {
        frame.render_widget(
            Paragraph::new("this file has no residual column")
                .block(Block::bordered().title(" residual ")),
            bottom,
        );
        return;
    }
    let extent = residuals
        .iter()
        .map(|p| p.1.abs())
        .fold(0.0_f64, f64::max)
        .max(1e-9);
    let zero = [(x_min, 0.0), (x_max, 0.0)];
    let part = state
        .part_cost(case, &signal)
        .map_or_else(String::new, |c| {
            if is_narrow {
                format!(" · part {}", significant(c, 4))
            } else {
                format!(" · part of the objective {}", significant(c, 4))
            }
        });
    let residual_title = if is_narrow {
        format!(" (model − measured)/σ{part} ")
    } else {
        format!(" residual (model − measured)/σ against time{part} ")
    };
    let chart = Chart::new(vec![
        Dataset::default()
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(look.dim())
            .data(&zero),
        Dataset::default()
            .marker(Marker::Dot)
            .graph_type(GraphType::Scatter)
            .style(look.accent())
            .data(&residuals),
    ])
    .block(Block::bordered().title(residual_title))
    .legend_position(None)
    .x_axis(time_axis("time (s)"))
    .y_axis(Axis::default().bounds([-extent, extent]).labels(vec![
        Line::from(significant(-extent, 2)),
        Line::from("0"),
        Line::from(significant(extent, 2)),
    ]));
    frame.render_widget(chart, bottom);
}

/// A signal with one value (the time to ignition): the numbers, not a one-point chart.
fn draw_scalar(
    frame: &mut Frame,
    area: Rect,
    scene: &Scene,
    curve: &super::state::CaseCurve,
    unit: &str,
    heading: String,
) {
    let look = scene.look;
    let measured = curve.measured[0];
    let model = curve.model.first().copied().unwrap_or(f64::NAN);
    let sigma = curve.sigma.first().copied().unwrap_or(f64::NAN);
    let difference = model - measured;
    let with_unit = |v: f64| {
        if unit.is_empty() {
            significant(v, 4)
        } else {
            format!("{} {unit}", significant(v, 4))
        }
    };
    let percent = if measured != 0.0 && measured.is_finite() {
        format!(" ({:+.1} %)", 100.0 * difference / measured)
    } else {
        String::new()
    };
    let mut lines = vec![
        label_value("measured", with_unit(measured), look),
        label_value("model", with_unit(model), look),
        label_value(
            "difference",
            format!(
                "{}{}{percent}",
                if difference > 0.0 { "+" } else { "" },
                with_unit(difference)
            ),
            look,
        ),
    ];
    if sigma.is_finite() {
        lines.push(label_value(
            "σ",
            format!(
                "{} (residual {:+.2} σ)",
                with_unit(sigma),
                difference / sigma
            ),
            look,
        ));
    }
    frame.render_widget(
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .block(Block::bordered().title(heading)),
        area,
    );
}

fn summary_text_lines<'a>(scene: &Scene, summary: &super::state::SummaryView) -> Vec<Line<'a>> {
    let look = scene.look;
    let mut lines = Vec::new();
    if let Some(title) = &summary.title {
        lines.push(Line::from(Span::styled(
            title.clone(),
            Style::default().add_modifier(Modifier::BOLD),
        )));
    }
    lines.push(label_value(
        "objective",
        summary
            .objective
            .map_or_else(|| "-".into(), |v| significant(v, 6)),
        look,
    ));
    if let Some(reason) = &summary.reason {
        lines.push(label_value("ended", reason.clone(), look));
    }
    lines.push(label_value(
        "evaluations",
        format!(
            "{} in {}",
            summary
                .evaluations
                .map_or_else(|| "-".into(), |n| n.to_string()),
            summary.elapsed_s.map_or_else(|| "-".into(), duration_text)
        ),
        look,
    ));
    // One line per case: its signals' parts of the objective.
    let mut by_case: Vec<(String, Vec<String>)> = Vec::new();
    for part in summary.parts.iter().flatten() {
        let cost = format!(
            "{} {}",
            signal_short(&part.signal),
            part.cost.map_or_else(|| "-".into(), |c| significant(c, 4))
        );
        match by_case.iter_mut().find(|(case, _)| *case == part.case) {
            Some((_, costs)) => costs.push(cost),
            None => by_case.push((part.case.clone(), vec![cost])),
        }
    }
    if !by_case.is_empty() {
        lines.push(Line::from(Span::styled(
            "parts of the objective:",
            look.dim(),
        )));
    }
    for (case, costs) in by_case {
        lines.push(Line::from(format!("  {case}: {}", costs.join(", "))));
    }
    lines.push(Line::from(Span::styled(
        "parameters (95 % intervals):",
        look.dim(),
    )));
    for row in scene.state.parameter_rows() {
        let interval = row
            .interval_95
            .map_or_else(|| "undetermined".into(), |(a, b)| interval_text(a, b));
        let unit = if row.unit.is_empty() || row.unit == "–" {
            String::new()
        } else {
            format!(" {}", row.unit)
        };
        lines.push(Line::from(format!(
            "  {} = {}{unit}  ({interval})",
            row.label,
            row.value.map_or_else(|| "-".into(), |v| significant(v, 5)),
        )));
    }
    if let Some(problem) = &summary.identifiability_problem {
        lines.push(Line::from(Span::styled(
            format!("intervals not computed: {problem}"),
            look.warn(),
        )));
    }
    for note in scene.state.notes() {
        lines.push(Line::from(Span::styled(
            format!("cannot show: {note}"),
            look.warn(),
        )));
    }
    lines.push(Line::from(Span::styled(
        "Model results support, and do not replace, standard tests, local codes and the judgement of a qualified fire engineer.",
        look.dim(),
    )));
    lines
}

fn draw_summary(frame: &mut Frame, area: Rect, scene: &Scene) {
    let look = scene.look;
    let Some(summary) = &scene.state.summary else {
        let text = if scene.state.is_over() {
            "this run has no summary.json (it ended before writing one)"
        } else {
            "the summary and the correlation matrix appear when the fit ends (summary.json); the Residuals view shows the current best model"
        };
        frame.render_widget(
            Paragraph::new(text)
                .wrap(Wrap { trim: false })
                .block(Block::bordered().title(" Summary ")),
            area,
        );
        return;
    };
    let is_wide = area.width >= 150;
    let text_width = if is_wide {
        area.width * 45 / 100
    } else {
        area.width
    };
    let wrap_to = text_width.saturating_sub(2) as usize;
    // Wrapped here (not by the paragraph) so the scrolling counts real lines.
    let wrap = |lines: Vec<Line<'static>>| -> Vec<Vec<Line<'static>>> {
        lines
            .into_iter()
            .map(|line| {
                let style = line.spans.first().map(|s| s.style).unwrap_or_default();
                let text: String = line.spans.iter().map(|s| s.content.as_ref()).collect();
                if text.chars().count() <= wrap_to {
                    vec![line]
                } else {
                    wrap_words(&text, wrap_to)
                        .into_iter()
                        .map(|t| Line::from(Span::styled(t, style)))
                        .collect()
                }
            })
            .collect()
    };
    let text = summary_text_lines(scene, summary);
    let matrix_title = format!(" Correlation: [±r] marks |r| ≥ {STRONG_CORRELATION} ");
    if is_wide {
        let [a, b] = Layout::horizontal([Constraint::Percentage(45), Constraint::Percentage(55)])
            .areas(area);
        let (lines, _) = scroll_window(
            &wrap(text),
            a.height.saturating_sub(2) as usize,
            scene.screen.scroll,
            "lines",
            look,
        );
        frame.render_widget(
            Paragraph::new(lines).block(Block::bordered().title(" Summary ")),
            a,
        );
        let matrix = correlation_lines(scene, b.width.saturating_sub(2) as usize);
        frame.render_widget(
            Paragraph::new(matrix).block(Block::bordered().title(matrix_title)),
            b,
        );
        return;
    }
    // Narrow: one list, the matrix after the text.
    let mut all = text;
    all.push(Line::from(""));
    all.push(Line::from(Span::styled(
        matrix_title.trim().to_string(),
        look.dim(),
    )));
    all.extend(correlation_lines(scene, wrap_to));
    let (lines, _) = scroll_window(
        &wrap(all),
        area.height.saturating_sub(2) as usize,
        scene.screen.scroll,
        "lines",
        look,
    );
    frame.render_widget(
        Paragraph::new(lines).block(Block::bordered().title(" Summary ")),
        area,
    );
}

/// An entry of the correlation matrix in `width` characters; strong ones in brackets.
fn correlation_cell(r: Option<f64>, is_diagonal: bool, width: usize) -> (String, bool) {
    let Some(r) = r else {
        return (format!("{:>width$}", "-"), false);
    };
    let is_strong = !is_diagonal && r.abs() >= STRONG_CORRELATION;
    let number = if width >= 7 {
        format!("{r:+.2}")
    } else if r.abs() >= 0.995 {
        format!("{r:+.1}")
    } else {
        // "+0.97" → "+.97" to fit six characters with the brackets.
        format!("{r:+.2}").replacen("0.", ".", 1)
    };
    if is_strong {
        (format!("{:>width$}", format!("[{number}]")), true)
    } else {
        (format!("{:>width$}", format!("{number} ")), false)
    }
}

/// The correlation matrix as text in `width` columns: rows named by the parameters' short
/// labels when they fit, else numbered with the labels listed below; strong off-diagonal
/// entries in brackets (and bold, and red when there is colour).
fn correlation_lines<'a>(scene: &Scene, width: usize) -> Vec<Line<'a>> {
    let look = scene.look;
    let Some(matrix) = scene.state.correlation() else {
        let reason = match scene
            .state
            .summary
            .as_ref()
            .and_then(|s| s.identifiability_problem.clone())
        {
            Some(problem) => format!("no correlation matrix: {problem}"),
            None => "no correlation matrix in summary.json".into(),
        };
        return vec![Line::from(reason)];
    };
    let labels: Vec<String> = scene
        .state
        .parameter_rows()
        .iter()
        .map(|r| r.label.clone())
        .collect();
    let n = matrix.len();
    let cell = if 4 + 7 * n <= width { 7 } else { 6 };
    let label_width = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0);
    let named_rows = 4 + label_width + 1 + cell * n <= width;
    let row_head = if named_rows { 4 + label_width + 1 } else { 4 };
    let mut lines = Vec::new();
    let mut header = vec![Span::raw(" ".repeat(row_head))];
    for j in 0..n {
        header.push(Span::styled(format!("{:>cell$}", j + 1), look.dim()));
    }
    lines.push(Line::from(header));
    for (i, row) in matrix.iter().enumerate() {
        let head = if named_rows {
            format!(
                "{:>3} {:<label_width$} ",
                i + 1,
                labels.get(i).cloned().unwrap_or_default()
            )
        } else {
            format!("{:>3} ", i + 1)
        };
        let mut spans = vec![Span::styled(head, look.dim())];
        for (j, r) in row.iter().enumerate() {
            let (text, is_strong) = correlation_cell(*r, i == j, cell);
            spans.push(if is_strong {
                Span::styled(text, look.warn())
            } else {
                Span::raw(text)
            });
        }
        lines.push(Line::from(spans));
    }
    if !named_rows {
        for (i, label) in labels.iter().enumerate() {
            lines.push(Line::from(Span::styled(
                format!("{:>3} {label}", i + 1),
                look.dim(),
            )));
        }
    }
    lines
}

fn draw_help(frame: &mut Frame, area: Rect, scene: &Scene) {
    let lines: Vec<Line> = help_lines(scene.screen.mode, scene.state.holder_pid)
        .into_iter()
        .map(Line::from)
        .collect();
    let width = (lines.iter().map(Line::width).max().unwrap_or(20) as u16 + 4).min(area.width);
    let height = (lines.len() as u16 + 2).min(area.height);
    let popup = Rect {
        x: area.x + (area.width - width) / 2,
        y: area.y + (area.height - height) / 2,
        width,
        height,
    };
    frame.render_widget(Clear, popup);
    frame.render_widget(
        Paragraph::new(lines)
            .wrap(Wrap { trim: false })
            .block(Block::bordered().title(" Keys ")),
        popup,
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::input::Action;
    use crate::tui::source::RunSource;
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;
    use std::path::{Path, PathBuf};
    use std::time::{Duration, UNIX_EPOCH};

    /// The fixed clock of every test: the fixture files' times are set from it, so nothing
    /// depends on when the repository was checked out.
    const CLOCK_S: u64 = 1_800_000_000;

    fn at(seconds_after: u64) -> SystemTime {
        UNIX_EPOCH + Duration::from_secs(CLOCK_S + seconds_after)
    }

    fn fixtures() -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/tui")
    }

    /// A fixture run read as a viewer reads it, with its file times on the fixed clock: the
    /// last progress line and checkpoint 3 s before `now`.
    fn fixture(name: &str) -> ViewerState {
        let mut state = ViewerState::default();
        RunSource::new(&fixtures().join(name)).refresh(&mut state);
        state.progress_modified = Some(at(0));
        state.checkpoint_modified = state.checkpoint_modified.map(|_| at(0));
        if name == "live-run" {
            state.checkpoint_modified = Some(at(0));
            // The fixture's run.lock names pid 4242, which is not alive on the test machine, so
            // the reader (`run::lock::holder_pid`, tested in its module) rightly drops it; the
            // snapshot shows the view of a live holder with that pid.
            state.holder_pid = Some(4242);
        }
        state
    }

    fn render(
        state: &ViewerState,
        screen: &Screen,
        look: Look,
        width: u16,
        height: u16,
    ) -> Terminal<TestBackend> {
        let mut terminal = Terminal::new(TestBackend::new(width, height)).unwrap();
        let mut screen = screen.clone();
        screen.holder_pid = state.holder_pid;
        let scene = Scene {
            state,
            screen: &screen,
            look,
            now: at(3),
        };
        terminal.draw(|frame| draw(frame, &scene)).unwrap();
        terminal
    }

    /// The screen's rows, exactly as drawn (trailing blanks trimmed).
    fn rows(terminal: &Terminal<TestBackend>) -> Vec<String> {
        let buffer = terminal.backend().buffer();
        (0..buffer.area.height)
            .map(|y| {
                let mut row = String::new();
                for x in 0..buffer.area.width {
                    row.push_str(buffer[(x, y)].symbol());
                }
                row.trim_end().to_string()
            })
            .collect()
    }

    fn text(terminal: &Terminal<TestBackend>) -> String {
        rows(terminal).join("\n")
    }

    /// Compares the drawn rows with `tests/fixtures/tui/snapshots/<name>.txt` line by line
    /// (EMBERFIT_UPDATE_SNAPSHOTS=1 rewrites the file instead; look at the diff).
    fn assert_snapshot(name: &str, terminal: &Terminal<TestBackend>) {
        let drawn = rows(terminal);
        let path = fixtures().join("snapshots").join(format!("{name}.txt"));
        if std::env::var_os("EMBERFIT_UPDATE_SNAPSHOTS").is_some() {
            std::fs::create_dir_all(path.parent().unwrap()).unwrap();
            std::fs::write(&path, drawn.join("\n") + "\n").unwrap();
            return;
        }
        let expected =
            std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        let expected: Vec<&str> = expected.lines().collect();
        assert_eq!(
            drawn.len(),
            expected.len(),
            "{name}: {} rows drawn, {} in the snapshot\n{}",
            drawn.len(),
            expected.len(),
            drawn.join("\n")
        );
        for (y, (got, want)) in drawn.iter().zip(&expected).enumerate() {
            assert_eq!(got, want, "{name}: row {y} differs\n{}", drawn.join("\n"));
        }
    }

    fn screen_on(view: View, mode: Mode) -> Screen {
        let mut screen = Screen::new(mode);
        screen.view = view;
        screen
    }

    const COLOUR: Look = Look { is_colour: true };

    fn view_name(view: View) -> &'static str {
        match view {
            View::Progress => "progress",
            View::Parameters => "parameters",
            View::Residuals => "residuals",
            View::Summary => "summary",
        }
    }

    #[test]
    fn every_view_of_a_finished_and_a_live_run_matches_its_snapshot_at_both_sizes() {
        for (run, mode) in [
            ("finished-run", Mode::Attached),
            ("live-run", Mode::ReadOnly),
        ] {
            let state = fixture(run);
            for view in View::ALL {
                for (width, height) in [(80, 24), (200, 60)] {
                    let screen = screen_on(view, mode);
                    assert_snapshot(
                        &format!("{run}-{}-{width}x{height}", view_name(view)),
                        &render(&state, &screen, COLOUR, width, height),
                    );
                }
            }
        }
    }

    #[test]
    fn the_residuals_of_each_kind_of_signal_match_their_snapshots() {
        let state = fixture("finished-run");
        // Signal 1 (hrr) has a stated noise σ: the band is drawn. Signal 2 is the time to
        // ignition: numbers, no chart. Signal 0 (mlr, σ the peak scale): no band.
        for (case, signal, name) in [(0, 1, "hrr"), (0, 2, "ignition"), (1, 0, "mlr")] {
            let mut screen = screen_on(View::Residuals, Mode::Attached);
            screen.case_idx = case;
            screen.signal_idx = signal;
            for (width, height) in [(80, 24), (200, 60)] {
                assert_snapshot(
                    &format!("finished-run-residuals-{name}-{width}x{height}"),
                    &render(&state, &screen, COLOUR, width, height),
                );
            }
        }
    }

    #[test]
    fn scrolled_lists_and_the_help_match_their_snapshots() {
        let state = fixture("finished-run");
        let mut screen = screen_on(View::Parameters, Mode::Attached);
        for _ in 0..100 {
            screen.apply(Action::NextSignal, &state.cases(), true);
        }
        assert_snapshot(
            "finished-run-parameters-end-80x24",
            &render(&state, &screen, COLOUR, 80, 24),
        );
        let mut screen = screen_on(View::Summary, Mode::Attached);
        for _ in 0..8 {
            screen.apply(Action::NextSignal, &state.cases(), true);
        }
        assert_snapshot(
            "finished-run-summary-scrolled-80x24",
            &render(&state, &screen, COLOUR, 80, 24),
        );
        let live = fixture("live-run");
        let mut screen = screen_on(View::Progress, Mode::ReadOnly);
        screen.apply(Action::ToggleHelp, &live.cases(), false);
        assert_snapshot(
            "live-run-help-80x24",
            &render(&live, &screen, COLOUR, 80, 24),
        );
    }

    /// While the posterior sample runs, the fit's budget is spent: the progress view shows
    /// the sample's step, acceptance, elapsed time and an estimate of the time left (mean time
    /// per step so far × steps left: 12 s / 30 steps × 90 steps left = 36 s, by hand) instead, and the
    /// header's estimate is the sample's.
    #[test]
    fn the_posterior_sample_replaces_the_budget_left_while_it_runs() {
        let mut state = fixture("live-run");
        let before = text(&render(
            &state,
            &screen_on(View::Progress, Mode::ReadOnly),
            COLOUR,
            80,
            24,
        ));
        assert!(before.contains("budget left"), "{before}");
        // Within the burn-in the acceptance is not counted yet: the view says so.
        state.apply(&crate::run::progress::ProgressEvent::Posterior {
            step: 8,
            steps: 120,
            burn_in: 20,
            acceptance: 0.0,
            elapsed_s: 3.2,
        });
        let shown = text(&render(
            &state,
            &screen_on(View::Progress, Mode::ReadOnly),
            COLOUR,
            80,
            24,
        ));
        assert!(
            shown.contains("sample          step 8/120, burn-in 8/20, 3.2 s elapsed"),
            "{shown}"
        );
        assert!(!shown.contains("0 % accepted"), "{shown}");
        state.apply(&crate::run::progress::ProgressEvent::Posterior {
            step: 30,
            steps: 120,
            burn_in: 20,
            acceptance: 0.384,
            elapsed_s: 12.0,
        });
        assert_eq!(state.time_left_s(), Some(36.0));
        let shown = text(&render(
            &state,
            &screen_on(View::Progress, Mode::ReadOnly),
            COLOUR,
            80,
            24,
        ));
        for expected in [
            "(posterior sample, step 30/120, 38 % accepted)",
            "sample          step 30/120, 38 % accepted, 12.0 s elapsed",
            "time left       ≈ 36.0 s for the sample's 90 steps left",
            "≈ 36.0 s to go",
            "stop it         kill -INT 4242",
        ] {
            assert!(shown.contains(expected), "missing `{expected}` in\n{shown}");
        }
        assert!(!shown.contains("budget left"), "{shown}");
    }

    #[test]
    fn a_list_longer_than_the_screen_says_where_it_is_and_what_is_below() {
        let state = fixture("finished-run");
        assert_eq!(state.parameter_rows().len(), 12);
        for (width, height) in [(80, 24), (100, 30)] {
            let shown = text(&render(
                &state,
                &screen_on(View::Parameters, Mode::Attached),
                COLOUR,
                width,
                height,
            ));
            assert!(shown.contains("parameters 1–"), "{shown}");
            assert!(shown.contains("more below (↑↓ to scroll)"), "{shown}");
        }
    }

    #[test]
    fn the_band_is_drawn_only_for_a_measured_spread() {
        let state = fixture("finished-run");
        let band_cells = |case: usize, signal: usize| {
            let mut screen = screen_on(View::Residuals, Mode::Attached);
            screen.case_idx = case;
            screen.signal_idx = signal;
            let terminal = render(&state, &screen, Look { is_colour: true }, 120, 40);
            // The measured-against-model chart only (the residual chart below has a dim zero
            // line).
            let buffer = terminal.backend().buffer();
            let mut n = 0;
            for y in 2..20 {
                for x in 0..buffer.area.width {
                    let cell = &buffer[(x, y)];
                    let is_braille = cell
                        .symbol()
                        .chars()
                        .next()
                        .is_some_and(|c| ('\u{2801}'..='\u{28ff}').contains(&c));
                    if cell.fg == Color::DarkGray && is_braille {
                        n += 1;
                    }
                }
            }
            n
        };
        // hrr: σ stated in the job; mlr: σ is the peak scale of the single test.
        assert!(band_cells(0, 1) > 20, "no band for a stated noise");
        assert_eq!(band_cells(0, 0), 0, "a band for a peak scale");
    }

    #[test]
    fn a_parameter_at_its_bound_is_flagged_in_words() {
        let mut state = fixture("finished-run");
        if let Some(parameters) = state.summary.as_mut().and_then(|s| s.parameters.as_mut()) {
            parameters[0].value = Some(0.4999);
            parameters[0].warnings = Some(Vec::new());
        }
        let screen = screen_on(View::Parameters, Mode::ReadOnly);
        let shown = text(&render(&state, &screen, Look { is_colour: false }, 100, 30));
        assert!(shown.contains("! at a bound"), "{shown}");
    }

    #[test]
    fn the_summary_brackets_strong_correlations_and_names_rows_by_label() {
        let mut state = fixture("finished-run");
        if let Some(matrix) = state.summary.as_mut().and_then(|s| s.correlation.as_mut()) {
            matrix[0][5] = Some(0.97);
            matrix[5][0] = Some(0.97);
        }
        let screen = screen_on(View::Summary, Mode::ReadOnly);
        let shown = text(&render(&state, &screen, Look { is_colour: false }, 200, 60));
        assert!(shown.contains("  1 k(300 K) virgin "), "{shown}");
        assert!(shown.contains(" 12 ign. mass flux "), "{shown}");
        assert_eq!(shown.matches("[+0.97]").count(), 2, "{shown}");
    }

    #[test]
    fn no_color_draws_without_any_colour() {
        let state = fixture("finished-run");
        for view in View::ALL {
            let mut screen = screen_on(view, Mode::ReadOnly);
            screen.message = Some("a message".into());
            let terminal = render(&state, &screen, Look { is_colour: false }, 100, 30);
            let buffer = terminal.backend().buffer();
            assert!(
                buffer
                    .content
                    .iter()
                    .all(|cell| cell.fg == Color::Reset && cell.bg == Color::Reset),
                "{view:?} uses colour"
            );
        }
    }

    #[test]
    fn every_view_survives_a_tiny_terminal() {
        for run in ["finished-run", "live-run", "older-run"] {
            let state = fixture(run);
            for view in View::ALL {
                render(&state, &screen_on(view, Mode::Attached), COLOUR, 20, 5);
                render(&state, &screen_on(view, Mode::ReadOnly), COLOUR, 1, 1);
            }
        }
    }

    #[test]
    fn an_older_run_shows_what_it_can_and_says_what_it_cannot() {
        let state = fixture("older-run");
        let screen = screen_on(View::Progress, Mode::ReadOnly);
        let shown = text(&render(&state, &screen, COLOUR, 100, 40));
        for expected in [
            "[FINISHED]",
            "invented older run",
            "status          FINISHED (iteration 2)",
            "best objective  6.25000",
            "evaluations     -",
            "against iterations",
            "cannot show: an older run (progress format 0)",
            "skipped 1 `probe_reading` lines",
            "`iteration` lines have no evaluations, parts",
            "summary.json has no parameters, correlation, parts",
        ] {
            assert!(shown.contains(expected), "missing `{expected}` in\n{shown}");
        }
        let parameters = text(&render(
            &state,
            &screen_on(View::Parameters, Mode::ReadOnly),
            COLOUR,
            120,
            30,
        ));
        // An older run has no short labels: the path stands in for one.
        assert!(
            parameters.contains("component.virgin.conductivity_w_m_k = 0.26000"),
            "{parameters}"
        );
        let residuals = text(&render(
            &state,
            &screen_on(View::Residuals, Mode::ReadOnly),
            COLOUR,
            120,
            30,
        ));
        assert!(residuals.contains("no cases yet"), "{residuals}");
        let summary = text(&render(
            &state,
            &screen_on(View::Summary, Mode::ReadOnly),
            COLOUR,
            120,
            30,
        ));
        assert!(
            summary.contains("no correlation matrix in summary.json"),
            "{summary}"
        );
    }

    #[test]
    fn the_bound_bar_places_value_and_interval() {
        let row = ParameterRow {
            name: "x".into(),
            label: "x".into(),
            meaning: String::new(),
            unit: String::new(),
            value: Some(5.0),
            lower: 0.0,
            upper: 10.0,
            log_scale: false,
            interval_95: Some((4.0, 6.0)),
            warnings: Vec::new(),
            is_at_bound: false,
            is_strongly_correlated: false,
            is_poorly_determined: false,
        };
        assert_eq!(bound_bar(&row, 11), "[────═●═────]");
    }

    #[test]
    fn words_wrap_at_spaces_and_cut_long_words() {
        assert_eq!(
            wrap_words("one two three four", 9),
            ["one two", "three", "four"]
        );
        assert_eq!(wrap_words("abcdefghijkl", 8), ["abcdefgh", "ijkl"]);
    }

    #[test]
    fn durations_read_as_words() {
        assert_eq!(duration_text(4.25), "4.2 s");
        assert_eq!(duration_text(125.0), "2 min 05 s");
        assert_eq!(duration_text(3.0 * 3600.0 + 420.0), "3 h 07 min");
    }
}
