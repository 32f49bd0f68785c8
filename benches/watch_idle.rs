//! Idle cost of the terminal interface: `emberfit watch` on a finished run (the fixture in
//! tests/fixtures/tui/finished-run) in a tmux pane, its CPU time over ten seconds. The target
//! is under 1 % of one core; this prints the figure and asserts nothing about time.

use std::process::Command;
use std::time::{Duration, Instant};

fn cpu_s(pid: u32) -> Option<f64> {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    let fields: Vec<&str> = stat.rsplit(')').next()?.split_whitespace().collect();
    let ticks: f64 = [11, 12]
        .iter()
        .filter_map(|i| fields.get(*i)?.parse::<f64>().ok())
        .sum();
    Some(ticks / 100.0)
}

fn main() {
    let socket = format!("emberfit-bench-{}", std::process::id());
    let tmux = |args: &[&str]| {
        Command::new("tmux")
            .args(["-L", &socket, "-f", "/dev/null"])
            .args(args)
            .output()
    };
    if tmux(&["-V"]).is_err() {
        println!("watch_idle: skipped, tmux is not installed");
        return;
    }
    let run = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/tui/finished-run"
    );
    let command = format!("exec {} watch {run}", env!("CARGO_BIN_EXE_emberfit"));
    let _ = tmux(&[
        "new-session",
        "-d",
        "-s",
        "watch",
        "-x",
        "200",
        "-y",
        "60",
        &command,
    ]);
    std::thread::sleep(Duration::from_secs(2));
    let pid: Option<u32> = tmux(&["display-message", "-p", "-t", "watch", "#{pane_pid}"])
        .ok()
        .and_then(|o| String::from_utf8_lossy(&o.stdout).trim().parse().ok());
    let Some(pid) = pid else {
        println!("watch_idle: the viewer did not start");
        let _ = tmux(&["kill-server"]);
        return;
    };
    for (view, key) in [("progress", "1"), ("residuals", "3"), ("summary", "4")] {
        let _ = tmux(&["send-keys", "-t", "watch", key]);
        std::thread::sleep(Duration::from_millis(500));
        let (Some(before), start) = (cpu_s(pid), Instant::now()) else {
            break;
        };
        std::thread::sleep(Duration::from_secs(10));
        let used = cpu_s(pid).unwrap_or(before) - before;
        println!(
            "watch_idle: {view} view of a finished run at 200x60: {:.3} CPU s in {:.1} s = {:.2} % of a core (target < 1 %)",
            used,
            start.elapsed().as_secs_f64(),
            100.0 * used / start.elapsed().as_secs_f64()
        );
    }
    let _ = tmux(&["send-keys", "-t", "watch", "q"]);
    let _ = tmux(&["kill-server"]);
}
