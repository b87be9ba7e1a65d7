//! The dashboard end to end: `brink demo` and `brink watch --follow` in a real terminal (tmux,
//! on a private server socket), the screen read with `capture-pane`, keys sent with
//! `send-keys`, a resize to a tiny window, and the exit status after `q`. CI installs tmux.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

/// Tmux servers started by this test binary, for socket names of their own.
static SERVERS: AtomicUsize = AtomicUsize::new(0);

/// A private tmux server running one command in an 80×24 window; killed on drop.
pub(crate) struct Tmux {
    socket: String,
    status_file: PathBuf,
    _dir: tempfile::TempDir,
}

impl Tmux {
    pub(crate) fn start(args: &[&str], env: &[(&str, &str)]) -> Tmux {
        let dir = tempfile::tempdir().unwrap();
        let status_file = dir.path().join("status");
        let socket = format!(
            "brink-test-{}-{}",
            std::process::id(),
            SERVERS.fetch_add(1, Ordering::Relaxed)
        );
        let bin = assert_cmd::cargo::cargo_bin("brink");
        let mut cmd = String::new();
        for (k, v) in env {
            cmd.push_str(&format!("{k}={v} "));
        }
        cmd.push_str(&shell_quote(&bin));
        for a in args {
            cmd.push(' ');
            cmd.push_str(&shell_quote(Path::new(a)));
        }
        // Record the exit status, then keep the pane so the restored screen can be read.
        let script = format!(
            "cd {}; {cmd}; echo \"exit=$?\" > {}; sleep 60",
            shell_quote(dir.path()),
            shell_quote(&status_file)
        );
        let ok = Command::new("tmux")
            .args([
                "-L",
                &socket,
                "-f",
                "/dev/null",
                "new-session",
                "-d",
                "-x",
                "80",
                "-y",
                "24",
            ])
            .arg(script)
            .status()
            .expect("tmux is needed for this test (CI installs it: apt-get install tmux)");
        assert!(ok.success(), "tmux new-session failed");
        Tmux {
            socket,
            status_file,
            _dir: dir,
        }
    }

    pub(crate) fn tmux(&self, args: &[&str]) -> String {
        let out = Command::new("tmux")
            .args(["-L", &self.socket])
            .args(args)
            .output()
            .unwrap();
        String::from_utf8_lossy(&out.stdout).into_owned()
    }

    pub(crate) fn screen(&self) -> String {
        self.tmux(&["capture-pane", "-p"])
    }

    pub(crate) fn keys(&self, keys: &[&str]) {
        let mut args = vec!["send-keys"];
        args.extend_from_slice(keys);
        self.tmux(&args);
    }

    /// Wait until the screen satisfies `ok`; panic with the last screen after `secs`.
    pub(crate) fn wait_for(&self, what: &str, secs: u64, ok: impl Fn(&str) -> bool) -> String {
        let deadline = Instant::now() + Duration::from_secs(secs);
        loop {
            let s = self.screen();
            if ok(&s) {
                return s;
            }
            if Instant::now() > deadline {
                panic!("timed out waiting for {what}; screen:\n{s}");
            }
            std::thread::sleep(Duration::from_millis(100));
        }
    }

    pub(crate) fn exit_status(&self, secs: u64) -> String {
        let deadline = Instant::now() + Duration::from_secs(secs);
        loop {
            if let Ok(s) = std::fs::read_to_string(&self.status_file) {
                return s.trim().to_string();
            }
            if Instant::now() > deadline {
                panic!("brink did not exit; screen:\n{}", self.screen());
            }
            std::thread::sleep(Duration::from_millis(100));
        }
    }
}

impl Drop for Tmux {
    fn drop(&mut self) {
        let _ = Command::new("tmux")
            .args(["-L", &self.socket, "kill-server"])
            .status();
    }
}

fn shell_quote(p: &Path) -> String {
    format!("'{}'", p.display().to_string().replace('\'', "'\\''"))
}

#[test]
fn demo_in_a_terminal_keys_resize_and_quit() {
    let t = Tmux::start(&["demo", "--snapshot-dir", "."], &[]);
    // The title and the four stage-box meters.
    let s = t.wait_for("the dashboard", 20, |s| {
        s.contains("brink") && s.contains("demo") && s.contains("recent clips")
    });
    assert!(s.contains("4 ch"), "{s}");
    // The vocal preamp (channel 2) flat-tops: its lamp says so in words and symbol.
    t.wait_for("a flat-top lamp", 20, |s| s.contains("▲ FLAT"));

    // Help overlay, then any key closes it.
    t.keys(&["?"]);
    let s = t.wait_for("the help overlay", 5, |s| {
        s.contains("any key closes this help")
    });
    for key in ["space", "save A and B", "compare", "quit"] {
        assert!(s.contains(key), "help lists {key}:\n{s}");
    }
    t.keys(&["x"]);
    t.wait_for("the help to close", 5, |s| {
        !s.contains("any key closes this help")
    });

    // Focus on channel 2, wait for its fingerprint, store it as A and save it.
    t.keys(&["j"]);
    t.wait_for("channel 2 in focus with a tone", 20, |s| {
        s.contains("▶  2") && s.contains("ch 2 fingerprint") && s.contains("THD")
    });
    t.keys(&["a"]);
    t.wait_for("snapshot A stored", 5, |s| s.contains("A = ch 2 at"));
    t.keys(&["s"]);
    t.wait_for("snapshot saved", 5, |s| {
        s.contains("saved") && s.contains("snapshot-a.json")
    });
    let saved = std::fs::read_to_string(t._dir.path().join("snapshot-a.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&saved).unwrap();
    assert_eq!(v["channel"], 2);
    assert!(
        v["distortion"]["fundamental_hz"].as_f64().is_some(),
        "{saved}"
    );

    // Too small, then back.
    t.tmux(&["resize-window", "-x", "20", "-y", "6"]);
    t.wait_for("the too-small notice", 5, |s| s.contains("too small"));
    t.tmux(&["resize-window", "-x", "80", "-y", "24"]);
    t.wait_for("the dashboard again", 5, |s| s.contains("recent clips"));

    t.keys(&["q"]);
    assert_eq!(t.exit_status(10), "exit=0");
    // The terminal is restored: the alternate screen is gone (the dashboard's text with it).
    let s = t.screen();
    assert!(!s.contains("recent clips"), "{s}");
}

#[test]
fn sigterm_restores_the_terminal_and_exits_cleanly() {
    let t = Tmux::start(
        &["demo", "--scene", "push-pull", "--meter", "vu"],
        &[("NO_COLOR", "1")],
    );
    t.wait_for("the dashboard", 20, |s| s.contains("meters: VU"));
    let pid = t.tmux(&["list-panes", "-F", "#{pane_pid}"]);
    // The pane's shell runs brink as its child.
    let out = Command::new("pkill")
        .args(["-TERM", "-P", pid.trim(), "brink"])
        .status()
        .unwrap();
    assert!(out.success(), "pkill found no brink");
    assert_eq!(t.exit_status(10), "exit=0");
    assert!(!t.screen().contains("meters: VU"));
}

/// A background `brink log`, killed if the test ends early.
struct Logger(Option<Child>);

impl Logger {
    /// SIGTERM, as a user ending the recording would send; the exit status.
    fn stop(mut self) -> Option<i32> {
        let mut child = self.0.take()?;
        Command::new("kill")
            .args(["-TERM", &child.id().to_string()])
            .status()
            .unwrap();
        child.wait().unwrap().code()
    }
}

impl Drop for Logger {
    fn drop(&mut self) {
        if let Some(mut c) = self.0.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// The meter line of channel `ch` on a captured screen: a focus mark or a space, then the
/// number in three columns.
pub(crate) fn meter_line(screen: &str, ch: usize) -> Option<String> {
    let head = format!("{ch:>3} ");
    screen
        .lines()
        .map(|l| l.chars().skip(1).collect::<String>())
        .find(|rest| rest.starts_with(&head))
}

/// `brink watch --follow` draws a log that another brink process is writing: `brink log
/// --loop --out` on a two-channel file, followed in the terminal. Both channels' levels, the
/// flat-top clip on channel 2 (its lamp and its line in the recent clips), the logger's stop
/// record when it ends; then q restores the terminal and exits 0.
#[test]
fn follow_draws_a_log_another_brink_is_writing() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("pair.wav");
    // Channel 1: a clean tone at -20 dBFS. Channel 2: a tone at -6 dBFS, clean for a second,
    // then driven 12 dB into a -6 dBFS clipper: one flat-top episode each pass of the loop,
    // closed (and logged) when the clean second comes round again.
    crate::util::brink()
        .arg("gen")
        .arg(&wav)
        .args([
            "sine:997@-20",
            "clip:997@-6,drive=0..12/2",
            "--length",
            "2s",
        ])
        .assert()
        .success();
    let log = dir.path().join("bench.ndjson");
    let logger = Logger(Some(
        Command::new(assert_cmd::cargo::cargo_bin("brink"))
            .args(["log", "--loop", "--every", "250ms", "--input"])
            .arg(format!("file:{}", wav.display()))
            .arg("--out")
            .arg(&log)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap(),
    ));
    let t = Tmux::start(&["watch", "--follow", log.to_str().unwrap()], &[]);
    let s = t.wait_for("the followed log", 20, |s| {
        s.contains("following") && s.contains("recent clips")
    });
    let title = s.lines().next().unwrap_or("");
    assert!(title.contains("bench.ndjson"), "{s}");
    assert!(title.contains("48000 Hz · 2 ch"), "{s}");
    assert!(
        title.contains("meters: peak"),
        "the right part fits too:\n{s}"
    );
    // The levels: peak, true peak and headroom of each channel, from the log's summaries.
    let s = t.wait_for("both channels' levels", 20, |s| {
        meter_line(s, 1).is_some_and(|l| l.contains("-20.0  -20.0  20.0"))
            && meter_line(s, 2).is_some_and(|l| l.contains("-6.0"))
    });
    assert!(
        meter_line(&s, 1).is_some_and(|l| l.contains("· no clips")),
        "{s}"
    );
    // The clip: channel 2's lamp (symbol and word) and the recent clips list.
    let s = t.wait_for("the flat-top episode", 30, |s| {
        meter_line(s, 2).is_some_and(|l| l.contains("▲ FLAT"))
            && s.lines()
                .any(|l| l.contains("ch 2") && l.contains("▲ flat top"))
    });
    assert!(
        meter_line(&s, 1).is_some_and(|l| l.contains("· no clips")),
        "channel 1 never clips:\n{s}"
    );
    // The logger ends (SIGTERM: stop record, status 0); the screen says the input ended.
    assert_eq!(logger.stop(), Some(0));
    t.wait_for("the stop record", 10, |s| {
        s.contains("input ended (the logger stopped)")
    });
    t.keys(&["q"]);
    assert_eq!(t.exit_status(10), "exit=0");
    let s = t.screen();
    assert!(!s.contains("recent clips"), "terminal restored:\n{s}");
}
