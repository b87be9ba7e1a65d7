//! brink's real capture code against real audio servers, with no sound card: ALSA through a PCM
//! that reads a raw file (the `file` plugin on a `null` slave), and JACK through a private
//! server on the dummy driver. The helpers and what they need are in `tests/servers/`.
//!
//! A test skips (with a note on stderr) only when the tools it needs are missing and `CI` is
//! unset; under CI a missing tool is a failure.

use std::f64::consts::PI;
use std::ffi::{OsStr, OsString};
use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::sync::{Mutex, MutexGuard};
use std::time::{Duration, Instant};

use serde_json::Value;

use crate::util::{brink, lin};

const RATE: u32 = 48_000;

/// These tests start servers and keep the CPU busy (the ALSA fixture is not paced): one at a
/// time.
static ONE_AT_A_TIME: Mutex<()> = Mutex::new(());

fn one_at_a_time() -> MutexGuard<'static, ()> {
    ONE_AT_A_TIME.lock().unwrap_or_else(|e| e.into_inner())
}

fn in_ci() -> bool {
    std::env::var_os("CI").is_some()
}

/// Whether `tool` is an executable file on `PATH`.
fn on_path(tool: &str) -> bool {
    std::env::var_os("PATH").is_some_and(|p| {
        std::env::split_paths(&p).any(|d| {
            d.join(tool)
                .metadata()
                .is_ok_and(|m| m.is_file() && m.permissions().mode() & 0o111 != 0)
        })
    })
}

/// Whether to skip for want of a tool: `needs` lists (what, present); when any is missing, say
/// which on stderr and return `true`. Under CI a missing tool fails the test instead.
fn skip_for_missing(test: &str, needs: &[(&str, bool)]) -> bool {
    let missing: Vec<&str> = needs.iter().filter(|n| !n.1).map(|n| n.0).collect();
    if missing.is_empty() {
        return false;
    }
    assert!(
        !in_ci(),
        "{test}: missing {} (CI must provide it: see tests/servers/README.md)",
        missing.join(", ")
    );
    eprintln!(
        "skipping {test}: missing {} (see tests/servers/README.md; with CI set this fails)",
        missing.join(", ")
    );
    true
}

fn helper(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/servers")
        .join(name)
}

/// Run a helper script to completion; panic with its output when it fails.
fn run_helper(script: &str, args: &[&str], envs: &[(&str, &OsStr)]) -> String {
    let out = Command::new("bash")
        .arg(helper(script))
        .args(args)
        .envs(envs.iter().copied())
        .stdin(Stdio::null())
        .output()
        .unwrap();
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "{script} {args:?} failed:\n{text}");
    text
}

/// The complete NDJSON lines of `text` (a line still being written is left out).
fn complete_records(text: &str) -> Vec<Value> {
    let end = text.rfind('\n').map_or(0, |i| i + 1);
    text[..end]
        .lines()
        .filter(|l| !l.trim().is_empty())
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not JSON ({e}): {l}")))
        .collect()
}

/// A short account of a log for failure messages: its first and last lines.
fn excerpt(recs: &[Value]) -> String {
    let lines: Vec<String> = recs.iter().map(Value::to_string).collect();
    if lines.len() <= 30 {
        return lines.join("\n");
    }
    format!(
        "{}\n... {} more ...\n{}",
        lines[..20].join("\n"),
        lines.len() - 30,
        lines[lines.len() - 10..].join("\n")
    )
}

fn kind_of(r: &Value) -> &str {
    r["kind"].as_str().unwrap_or("")
}

fn f(v: &Value) -> Option<f64> {
    v.as_f64()
}

/// `brink log` running in the background, its records going to a file.
struct LogRun {
    child: Child,
    out: PathBuf,
    stderr: PathBuf,
}

impl LogRun {
    /// Start `brink log ARGS --out DIR/run.ndjson`; `polite`: at a lower priority (`nice`), for
    /// a run that keeps the CPU busy by design, so that tests running beside it keep up.
    fn spawn(dir: &Path, args: &[&str], envs: &[(&str, &OsStr)], polite: bool) -> LogRun {
        let out = dir.join("run.ndjson");
        let stderr = dir.join("run.stderr");
        let bin = assert_cmd::cargo::cargo_bin("brink");
        let mut cmd = if polite {
            // nice execs brink: the child's pid is brink's.
            let mut c = Command::new("nice");
            c.args(["-n", "10"]).arg(bin);
            c
        } else {
            Command::new(bin)
        };
        let child = cmd
            .arg("log")
            .args(args)
            .arg("--out")
            .arg(&out)
            .envs(envs.iter().copied())
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(std::fs::File::create(&stderr).unwrap())
            .spawn()
            .unwrap();
        LogRun { child, out, stderr }
    }

    fn records(&self) -> Vec<Value> {
        complete_records(&std::fs::read_to_string(&self.out).unwrap_or_default())
    }

    fn stderr(&self) -> String {
        std::fs::read_to_string(&self.stderr).unwrap_or_default()
    }

    /// Poll the log until `done` holds; panic (with the log so far) when brink exits first or
    /// `limit` passes.
    fn wait_for(
        &mut self,
        what: &str,
        limit: Duration,
        done: impl Fn(&[Value]) -> bool,
    ) -> Vec<Value> {
        let t0 = Instant::now();
        loop {
            let recs = self.records();
            if done(&recs) {
                return recs;
            }
            if let Some(status) = self.child.try_wait().unwrap() {
                panic!(
                    "brink exited ({status}) before {what}\nstderr:\n{}\nlog:\n{}",
                    self.stderr(),
                    excerpt(&recs)
                );
            }
            if t0.elapsed() > limit {
                panic!(
                    "no {what} within {limit:?}\nstderr:\n{}\nlog:\n{}",
                    self.stderr(),
                    excerpt(&recs)
                );
            }
            std::thread::sleep(Duration::from_millis(50));
        }
    }

    /// SIGTERM, then wait (at most 20 s) for the exit: status and the whole log.
    fn stop(&mut self) -> (ExitStatus, Vec<Value>) {
        Command::new("kill")
            .args(["-TERM", &self.child.id().to_string()])
            .status()
            .unwrap();
        let t0 = Instant::now();
        let status = loop {
            if let Some(s) = self.child.try_wait().unwrap() {
                break s;
            }
            if t0.elapsed() > Duration::from_secs(20) {
                let _ = self.child.kill();
                let _ = self.child.wait();
                panic!(
                    "brink did not exit within 20 s of SIGTERM\nstderr:\n{}\nlog:\n{}",
                    self.stderr(),
                    excerpt(&self.records())
                );
            }
            std::thread::sleep(Duration::from_millis(20));
        };
        (status, self.records())
    }
}

impl Drop for LogRun {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

/// The `stop` record's totals add up: frames delivered = analysed + dropped, dropped = the sum
/// of the `dropped` records, and the counts match the records written.
fn check_accounting(recs: &[Value]) -> (u64, u64, u64) {
    let stop = recs.last().unwrap();
    assert_eq!(kind_of(stop), "stop", "stop last:\n{}", excerpt(recs));
    let t = &stop["totals"];
    let get = |k: &str| {
        t[k].as_u64()
            .unwrap_or_else(|| panic!("stop totals without \"{k}\": {stop}"))
    };
    let (delivered, analysed, dropped) = (
        get("frames_delivered"),
        get("frames_analysed"),
        get("dropped_frames"),
    );
    assert_eq!(
        delivered,
        analysed + dropped,
        "every delivered frame is analysed or dropped: {stop}"
    );
    let dropped_records: u64 = recs
        .iter()
        .filter(|r| kind_of(r) == "dropped")
        .map(|r| r["frames"].as_u64().unwrap())
        .sum();
    // Every gap is a record unless the writer missed results (then it says how many).
    if get("results_missed") == 0 {
        assert_eq!(
            dropped_records, dropped,
            "dropped records add up to the total: {stop}"
        );
    } else {
        assert!(dropped_records <= dropped, "{stop}");
    }
    let count = |k: &str| recs.iter().filter(|r| kind_of(r) == k).count() as u64;
    assert_eq!(get("summaries"), count("summary"), "{stop}");
    assert_eq!(get("clip_events"), count("clip"), "{stop}");
    let _xruns = get("xruns");
    (delivered, analysed, dropped)
}

// ---------------------------------------------------------------------------------------------
// ALSA: a capture PCM reading a raw file.

/// Set-up of the ALSA fixture: a raw file and a `.asoundrc` in a temporary HOME.
struct AlsaFixture {
    dir: tempfile::TempDir,
}

impl AlsaFixture {
    /// Raw FLOAT_LE stereo at 48 kHz, 3 s. Channel 1: a clean 997 Hz tone peaking at −12 dBFS
    /// for 1 s, then a 220 Hz tone driven 6 dB into flat tops at −6 dBFS. Channel 2: 440 Hz at
    /// −20 dBFS throughout, never clipped (a channel mix-up shows).
    fn new() -> AlsaFixture {
        let dir = tempfile::tempdir().unwrap();
        let clean = RATE as usize;
        let total = 3 * RATE as usize;
        let ceiling = lin(-6.0);
        let mut bytes = Vec::with_capacity(total * 8);
        for n in 0..total {
            let t = n as f64 / f64::from(RATE);
            let ch1 = if n < clean {
                lin(-12.0) * (2.0 * PI * 997.0 * t).sin()
            } else {
                let t1 = (n - clean) as f64 / f64::from(RATE);
                (2.0 * ceiling * (2.0 * PI * 220.0 * t1).sin()).clamp(-ceiling, ceiling)
            };
            let ch2 = lin(-20.0) * (2.0 * PI * 440.0 * t).sin();
            bytes.extend_from_slice(&(ch1 as f32).to_le_bytes());
            bytes.extend_from_slice(&(ch2 as f32).to_le_bytes());
        }
        let raw = dir.path().join("fixture.f32");
        std::fs::write(&raw, bytes).unwrap();
        run_helper(
            "alsa-fixture.sh",
            &[
                "setup",
                dir.path().to_str().unwrap(),
                raw.to_str().unwrap(),
                "FLOAT_LE",
                "brink_fixture",
            ],
            &[],
        );
        AlsaFixture { dir }
    }

    fn home(&self) -> &Path {
        self.dir.path()
    }

    /// The environment that makes a child see the fixture (and no other user configuration).
    fn env(&self) -> Vec<(&'static str, OsString)> {
        vec![
            ("HOME", self.home().as_os_str().to_owned()),
            (
                "XDG_CONFIG_HOME",
                self.home().join(".config").into_os_string(),
            ),
        ]
    }
}

fn alsa_missing(test: &str) -> bool {
    skip_for_missing(
        test,
        &[
            ("bash", on_path("bash")),
            (
                "ALSA's configuration (/usr/share/alsa/alsa.conf, package libasound2-data)",
                Path::new("/usr/share/alsa/alsa.conf").exists(),
            ),
        ],
    )
}

/// `brink devices --host alsa --json` lists the fixture by name, as an input with two channels.
#[test]
fn alsa_fixture_is_listed_by_brink_devices() {
    if alsa_missing("alsa_fixture_is_listed_by_brink_devices") {
        return;
    }
    let _one = one_at_a_time();
    let fx = AlsaFixture::new();
    let out = brink()
        .args(["devices", "--host", "alsa", "--json"])
        .envs(fx.env())
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    let json: Value = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "not one JSON document ({e}):\n{}",
            String::from_utf8_lossy(&out.stdout)
        )
    });
    let hosts = json
        .get("hosts")
        .unwrap_or(&json)
        .as_array()
        .unwrap_or_else(|| panic!("no list of hosts: {json}"));
    let alsa = hosts
        .iter()
        .find(|h| h["host"] == "alsa" || h["name"] == "alsa")
        .unwrap_or_else(|| panic!("no alsa host: {json}"));
    let devices = alsa["devices"]
        .as_array()
        .unwrap_or_else(|| panic!("alsa without devices: {alsa}"));
    let fixture = devices
        .iter()
        .find(|d| d["name"] == "brink_fixture")
        .unwrap_or_else(|| panic!("brink_fixture not listed by name: {alsa}"));
    let channels = fixture
        .get("input_channels")
        .unwrap_or_else(|| panic!("device without \"input_channels\": {fixture}"));
    assert!(
        channels.as_u64().is_some_and(|n| n >= 2),
        "the fixture captures 2 channels: {fixture}"
    );
}

/// The fixture through `brink log`: the clean second reads as 997 Hz at −12 dBFS, then flat-top
/// clip events at −6 dBFS and the 220 Hz fundamental; channel 2 stays 440 Hz at −20 dBFS. The
/// fixture is not paced (it delivers hundreds of times faster than real time, and past the end of
/// the file it repeats its last block), so analysis falls behind and frames are dropped: every
/// frame delivered must be analysed or reported dropped.
#[test]
fn alsa_capture_measures_the_fixture_and_accounts_for_every_frame() {
    if alsa_missing("alsa_capture_measures_the_fixture_and_accounts_for_every_frame") {
        return;
    }
    let _one = one_at_a_time();
    let fx = AlsaFixture::new();
    let env = fx.env();
    let env: Vec<(&str, &OsStr)> = env.iter().map(|(k, v)| (*k, v.as_os_str())).collect();
    let mut run = LogRun::spawn(
        fx.home(),
        &[
            "--host",
            "alsa",
            "--input",
            "brink_fixture",
            "--channels",
            "1-2",
            "--rate",
            "48000",
            "--every",
            "250ms",
        ],
        &env,
        true,
    );
    // Stream time runs far ahead of the wall clock: wait for summaries past the clipped part.
    run.wait_for("summary past t = 2 s", Duration::from_secs(60), |recs| {
        recs.iter()
            .any(|r| kind_of(r) == "summary" && f(&r["t_s"]).is_some_and(|t| t >= 2.0))
    });
    let (status, recs) = run.stop();
    let stderr = run.stderr();
    let all = excerpt(&recs);
    assert_eq!(status.code(), Some(0), "{stderr}\n{all}");
    assert!(!stderr.contains("panicked"), "{stderr}");

    let start = &recs[0];
    assert_eq!(kind_of(start), "start", "{all}");
    assert_eq!(start["host"], "alsa", "{start}");
    assert!(
        start["device"]
            .as_str()
            .is_some_and(|d| d.contains("brink_fixture")),
        "{start}"
    );
    assert_eq!(start["sample_rate_hz"], 48_000, "{start}");

    let sums: Vec<&Value> = recs.iter().filter(|r| kind_of(r) == "summary").collect();
    assert!(!sums.is_empty(), "{all}");
    let ch = |s: &Value, i: usize| s["channels"][i].clone();
    let s0 = |c: &Value| c["sample_peak_dbfs"].clone();
    let ch1_id = ch(sums[0], 0)["channel"].clone();

    // The first interval is the clean tone, read whole (nothing is dropped before the capture
    // ring fills); its levels are there at once, its fundamental once the tone analysis has
    // seen enough of it.
    let (c1, c2) = (ch(sums[0], 0), ch(sums[0], 1));
    assert!(f(&s0(&c1)).is_some_and(|p| (p + 12.0).abs() < 0.2), "{c1}");
    assert_eq!(c1["flat_tops"], 0, "{c1}");
    assert!(f(&s0(&c2)).is_some_and(|p| (p + 20.0).abs() < 0.2), "{c2}");
    let clean: Vec<&&Value> = sums
        .iter()
        .filter(|s| f(&s["t_s"]).is_some_and(|t| t <= 1.0 + 1e-6))
        .collect();
    // The channels take turns for tone analysis (channel 2 an eighth of a second after
    // channel 1), so only channel 1's first analysis falls inside the clean second.
    assert!(
        clean
            .iter()
            .any(|s| f(&ch(s, 0)["fundamental_hz"]).is_some_and(|hz| (hz - 997.0).abs() < 0.5)),
        "a summary of the clean second with the fundamental 997 Hz:\n{all}"
    );
    // Nothing in the clean second clips, whatever was dropped.
    for s in &clean {
        let c1 = ch(s, 0);
        assert_eq!(c1["flat_tops"], 0, "clean second: {s}");
        if let Some(hz) = f(&c1["fundamental_hz"]) {
            assert!((hz - 997.0).abs() < 0.5, "clean second: {s}");
        }
        if let Some(p) = f(&s0(&c1)) {
            assert!((p + 12.0).abs() < 0.2, "clean second: {s}");
        }
    }
    // Within the file, channel 2 is 440 Hz at −20 dBFS and never flat.
    assert!(
        sums.iter().any(|s| {
            f(&s["t_s"]).is_some_and(|t| t <= 3.0 + 1e-6)
                && f(&ch(s, 1)["fundamental_hz"]).is_some_and(|hz| (hz - 440.0).abs() < 0.5)
        }),
        "a summary with channel 2's 440 Hz:\n{all}"
    );
    for s in sums
        .iter()
        .filter(|s| f(&s["t_s"]).is_some_and(|t| t <= 3.0 + 1e-6))
    {
        let c2 = ch(s, 1);
        assert_eq!(c2["flat_tops"], 0, "channel 2: {s}");
        if let Some(hz) = f(&c2["fundamental_hz"]) {
            assert!((hz - 440.0).abs() < 0.5, "channel 2: {s}");
        }
    }
    // The clipped part: 220 Hz with flat tops (read whole as long as the first 1.25 s of the
    // stream fit in the capture ring before analysis falls behind).
    assert!(
        sums.iter().any(|s| {
            let c1 = ch(s, 0);
            f(&s["t_s"]).is_some_and(|t| (1.25 - 1e-6..=3.0 + 1e-6).contains(&t))
                && c1["flat_tops"].as_u64().unwrap_or(0) > 0
                && f(&c1["fundamental_hz"]).is_some_and(|hz| (hz - 220.0).abs() < 0.5)
        }),
        "a summary of the clipped tone (220 Hz, flat tops) between 1.25 s and 3 s:\n{all}"
    );

    // Flat-top clip events, at −6 dBFS, on channel 1, none in the clean second.
    let clips: Vec<&Value> = recs.iter().filter(|r| kind_of(r) == "clip").collect();
    assert!(
        clips.iter().any(|c| c["clip"] == "flat-top"),
        "flat-top clip events:\n{all}"
    );
    for c in &clips {
        assert_eq!(c["channel"], ch1_id, "only channel 1 clips: {c}");
        if c["clip"] == "flat-top" {
            let level = f(&c["level_dbfs"]).unwrap();
            assert!((level + 6.0).abs() <= 0.2, "flat tops at −6 dBFS: {c}");
        }
        if let Some(t) = f(&c["t_s"]) {
            assert!(t >= 1.0 - 0.01, "no clipping in the clean second: {c}");
        }
    }

    let (delivered, _analysed, dropped) = check_accounting(&recs);
    assert!(delivered >= 2 * u64::from(RATE), "{}", recs.last().unwrap());
    assert!(
        dropped > 0,
        "an unpaced fixture outruns the analysis, so some frames must be dropped: {}",
        recs.last().unwrap()
    );
}

// ---------------------------------------------------------------------------------------------
// JACK: a private server on the dummy driver, a tone client, a stop and a restart mid-run.

/// A JACK server of our own, stopped when dropped (also when the test fails).
struct JackServer {
    name: String,
    state: PathBuf,
}

impl JackServer {
    /// A private server named for `tag` and this process, its state under `dir`; one left by an
    /// earlier run that died is stopped first. Not started yet.
    fn private(dir: &Path, tag: &str) -> JackServer {
        let server = JackServer {
            name: format!("brink-{tag}-{}", std::process::id()),
            state: dir.join("jack-state"),
        };
        server.stop();
        server
    }

    /// What a JACK client needs to use this server, and never start one of its own.
    fn client_env(&self) -> [(&'static str, &OsStr); 2] {
        [
            ("JACK_DEFAULT_SERVER", OsStr::new(&self.name)),
            ("JACK_NO_START_SERVER", OsStr::new("1")),
        ]
    }

    /// Start the server alone, without the tone client.
    fn start_bare(&self) -> String {
        run_helper("jack-server.sh", &["start", &self.name], &self.envs())
    }

    fn envs(&self) -> [(&str, &OsStr); 1] {
        [("BRINK_JACK_STATE_DIR", self.state.as_os_str())]
    }

    fn start(&self) -> String {
        run_helper(
            "jack-server.sh",
            &["start", &self.name, TONE_CLIENT],
            &self.envs(),
        )
    }

    fn stop(&self) -> String {
        run_helper("jack-server.sh", &["stop", &self.name], &self.envs())
    }
}

impl Drop for JackServer {
    fn drop(&mut self) {
        let _ = Command::new("bash")
            .arg(helper("jack-server.sh"))
            .args(["stop", &self.name])
            .env("BRINK_JACK_STATE_DIR", &self.state)
            .stdin(Stdio::null())
            .output();
    }
}

/// The tone client's name: `jack_simple_client` plays 240 Hz on `output1` and 720 Hz on
/// `output2`, peaks 0.2 (−13.98 dBFS).
const TONE_CLIENT: &str = "brink_tone";

fn is_tone(s: &Value) -> bool {
    let near = |v: &Value, want: f64, tol: f64| f(v).is_some_and(|x| (x - want).abs() < tol);
    let (c1, c2) = (&s["channels"][0], &s["channels"][1]);
    near(&c1["fundamental_hz"], 240.0, 0.5)
        && near(&c1["sample_peak_dbfs"], -13.98, 0.2)
        && near(&c2["fundamental_hz"], 720.0, 0.5)
        && near(&c2["sample_peak_dbfs"], -13.98, 0.2)
}

/// Connect the tone client's outputs, in order, to brink's capture ports (cpal's JACK client,
/// `cpal_client_*`, ports `in_N`), as a person would with `jack_connect`. Waits up to `limit`
/// for brink's ports to appear; connecting again is harmless.
fn connect_tone(env: &[(&str, &OsStr)], limit: Duration) -> Vec<String> {
    let deadline = std::time::Instant::now() + limit;
    loop {
        let out = Command::new("jack_lsp")
            .envs(env.iter().copied())
            .stdin(Stdio::null())
            .output()
            .unwrap();
        let mut ours: Vec<String> = String::from_utf8_lossy(&out.stdout)
            .lines()
            .filter(|l| l.starts_with("cpal_client") && l.contains(":in_"))
            .map(str::to_string)
            .collect();
        ours.sort();
        if ours.len() >= 2 {
            for (src, dst) in [("output1", &ours[0]), ("output2", &ours[1])] {
                let _ = Command::new("jack_connect")
                    .envs(env.iter().copied())
                    .arg(format!("{TONE_CLIENT}:{src}"))
                    .arg(dst)
                    .stdin(Stdio::null())
                    .output();
            }
            return ours;
        }
        assert!(
            std::time::Instant::now() < deadline,
            "brink's JACK capture ports did not appear: {}",
            String::from_utf8_lossy(&out.stdout)
        );
        std::thread::sleep(Duration::from_millis(100));
    }
}

fn position(recs: &[Value], kind: &str) -> Option<usize> {
    recs.iter().position(|r| kind_of(r) == kind)
}

/// `brink log --host jack` with a tone client's ports connected to brink's input by
/// `jack_connect`: the tone is measured; the server is stopped mid-run (`input-lost`) and
/// started again with the tone (`input-restored`), the ports are connected again, and
/// measurement goes on, with no crash and every frame accounted for.
#[test]
fn jack_capture_survives_a_server_stop_and_restart() {
    let test = "jack_capture_survives_a_server_stop_and_restart";
    if skip_for_missing(
        test,
        &[
            ("bash", on_path("bash")),
            ("jackd (package jackd2)", on_path("jackd")),
            ("jack_lsp (package jackd2)", on_path("jack_lsp")),
            (
                "jack_simple_client (package jackd2)",
                on_path("jack_simple_client"),
            ),
            (
                "brink built with JACK (cargo test --features jack; needs libjack-jackd2-dev)",
                cfg!(feature = "jack"),
            ),
        ],
    ) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let server = JackServer::private(dir.path(), "test");
    server.start();

    let env = server.client_env();
    let mut run = LogRun::spawn(
        dir.path(),
        &[
            "--host",
            "jack",
            "--channels",
            "1-2",
            "--rate",
            "48000",
            "--every",
            "250ms",
        ],
        &env,
        false,
    );
    connect_tone(&env, Duration::from_secs(20));
    run.wait_for("3 summaries of the tone", Duration::from_secs(30), |recs| {
        recs.iter()
            .filter(|r| kind_of(r) == "summary" && is_tone(r))
            .count()
            >= 3
    });

    server.stop();
    run.wait_for(
        "input-lost record after the server stopped",
        Duration::from_secs(15),
        |recs| position(recs, "input-lost").is_some(),
    );
    std::thread::sleep(Duration::from_millis(300));
    server.start();
    run.wait_for(
        "input-restored record after the server came back",
        Duration::from_secs(45),
        |recs| position(recs, "input-restored").is_some(),
    );
    // Connect the tone again, as a person would after a restart; repeat (it is harmless) until
    // the tone shows, since brink may reopen its ports a moment after its restored record.
    let tone_after_restore = |recs: &[Value]| {
        position(recs, "input-restored").is_some_and(|at| {
            recs[at..]
                .iter()
                .filter(|r| kind_of(r) == "summary" && is_tone(r))
                .count()
                >= 2
        })
    };
    let t0 = Instant::now();
    while !tone_after_restore(&run.records()) && t0.elapsed() < Duration::from_secs(40) {
        connect_tone(&env, Duration::from_secs(20));
        std::thread::sleep(Duration::from_secs(1));
    }
    let recs = run.wait_for(
        "input-restored record and 2 summaries of the tone after it",
        Duration::from_secs(5),
        tone_after_restore,
    );
    assert!(
        !recs.iter().any(|r| kind_of(r) == "stop"),
        "brink kept running through the restart:\n{}",
        excerpt(&recs)
    );

    let (status, recs) = run.stop();
    let stderr = run.stderr();
    let all = excerpt(&recs);
    assert_eq!(status.code(), Some(0), "{stderr}\n{all}");
    assert!(!stderr.contains("panicked"), "{stderr}");

    let start = &recs[0];
    assert_eq!(kind_of(start), "start", "{all}");
    assert_eq!(start["host"], "jack", "{start}");
    assert_eq!(start["sample_rate_hz"], 48_000, "{start}");
    assert!(start["device"].is_string(), "{start}");

    // In order: tone, lost, restored, tone again.
    let lost = position(&recs, "input-lost").unwrap();
    let restored = position(&recs, "input-restored").unwrap();
    assert!(lost < restored, "{all}");
    assert!(
        recs[lost]["reason"].as_str().is_some_and(|s| !s.is_empty()),
        "{}",
        recs[lost]
    );
    let tone_before = recs[..lost]
        .iter()
        .filter(|r| kind_of(r) == "summary" && is_tone(r))
        .count();
    assert!(tone_before >= 3, "{all}");
    // In steady stretches every reading is the tone: from the first tone summary up to the loss,
    // and from 2 s (the 1 s analysis window plus margin) after the ports were connected again.
    // Readings whose window straddles the connection or the restart measure a mix of silence
    // and tone, truthfully, and are not held to the tone's figures.
    let first_tone = recs
        .iter()
        .position(|r| kind_of(r) == "summary" && is_tone(r))
        .unwrap();
    let settled = f(&recs[restored]["t_s"]).unwrap() + 2.0;
    let steady = recs[first_tone..lost].iter().chain(
        recs[restored..]
            .iter()
            .filter(|r| f(&r["t_s"]).is_some_and(|t| t >= settled)),
    );
    for s in steady.filter(|r| kind_of(r) == "summary") {
        for (i, hz) in [(0, 240.0), (1, 720.0)] {
            let c = &s["channels"][i];
            if let Some(x) = f(&c["fundamental_hz"]) {
                assert!((x - hz).abs() < 0.5, "channel {}: {s}", i + 1);
            }
            if let Some(p) = f(&c["sample_peak_dbfs"]) {
                assert!((p + 13.98).abs() < 0.2, "channel {}: {s}", i + 1);
            }
        }
    }
    let tone_after = recs[restored..]
        .iter()
        .filter(|r| kind_of(r) == "summary" && is_tone(r))
        .count();
    assert!(tone_after >= 2, "{all}");
    assert_eq!(
        recs.iter().filter(|r| kind_of(r) == "input-lost").count(),
        recs.iter()
            .filter(|r| kind_of(r) == "input-restored")
            .count(),
        "every loss restored: {all}"
    );
    // A sine at −14 dBFS never clips.
    assert!(!recs.iter().any(|r| kind_of(r) == "clip"), "{all}");

    check_accounting(&recs);
}

/// The numbers of a dashboard meter line (from `dashboard::meter_line`): sample peak (dBFS), true
/// peak (dBTP) and headroom (dB), each `None` where the screen shows `--`. The line reads
/// "  N BAR PEAK TRUE ROOM LAMP"; the bar is one word of block glyphs, `·` and `│`.
fn meter_numbers(line: &str) -> [Option<f64>; 3] {
    let words: Vec<&str> = line.split_whitespace().collect();
    let at = |i: usize| words.get(i).and_then(|w| w.parse::<f64>().ok());
    [at(2), at(3), at(4)]
}

/// Both channels' meter lines show a sample peak within ±0.2 dB of `want` dBFS, and the same
/// for the true peak when `true_peak` (each: the highest since the last reset).
fn meters_read(screen: &str, want: f64, true_peak: bool) -> bool {
    (1..=2).all(|ch| {
        crate::dashboard::meter_line(screen, ch).is_some_and(|l| {
            let [peak, tp, _] = meter_numbers(&l);
            peak.is_some_and(|p| (p - want).abs() <= 0.2)
                && (!true_peak || tp.is_some_and(|t| (t - want).abs() <= 0.2))
        })
    })
}

/// The focused channel's fingerprint on screen: its channel (from the panel's title), the
/// fundamental (Hz) and its level (dBFS), from "F Hz  at L dBFS".
fn focus_tone(screen: &str) -> Option<(usize, f64, Option<f64>)> {
    let ch = screen.lines().find_map(|l| {
        let rest = l.split(" fingerprint ").next()?;
        (rest.len() < l.len())
            .then(|| rest.trim().strip_prefix("ch ")?.parse().ok())
            .flatten()
    })?;
    let line = screen.lines().find(|l| l.contains(" Hz  at "))?;
    let (before, after) = line.split_once(" Hz  at ")?;
    let hz = before.split_whitespace().last()?.parse().ok()?;
    let level = after.split_whitespace().next().and_then(|w| w.parse().ok());
    Some((ch, hz, level))
}

/// The character line of the focused fingerprint: the right column's words after the
/// odd/even balance line (the last words of their line, after a run of spaces).
fn character_line(screen: &str) -> Option<String> {
    let mut lines = screen.lines();
    lines.find(|l| l.contains("odd ◀"))?;
    let next = lines.next()?;
    Some(next.rsplit("  ").next()?.trim().to_string())
}

/// The focused channel shows a steady, clean tone at `hz` (±0.5 Hz) and −13.98 dBFS (±0.2).
fn focus_is(screen: &str, ch: usize, hz: f64) -> bool {
    let mark = format!("▶{ch:>3} ");
    screen.lines().any(|l| l.starts_with(&mark))
        && focus_tone(screen).is_some_and(|(c, f, level)| {
            c == ch && (f - hz).abs() <= 0.5 && level.is_some_and(|l| (l + 13.98).abs() <= 0.2)
        })
        && character_line(screen).as_deref() == Some("clean")
}

/// Neither lamp has lit and the recent clips list is empty.
fn no_clips(screen: &str) -> bool {
    (1..=2).all(|ch| {
        crate::dashboard::meter_line(screen, ch).is_some_and(|l| l.ends_with("· no clips"))
    }) && {
        let mut lines = screen.lines();
        lines.find(|l| l.starts_with(" recent clips "));
        lines.next().map(str::trim) == Some("none")
    }
}

/// `brink watch --host jack` in a real terminal (tmux) on a private JACK server, the tone
/// client's ports connected to brink's input with `jack_connect`: the title names the JACK input
/// at 48000 Hz; both channels' peaks read −14.0 dBFS (the tone's 0.2 = −13.98 dBFS); channel 1's
/// fingerprint is 240 Hz and, with the focus moved down, channel 2's is 720 Hz, both clean;
/// neither lamp lights. After `r` (reset peaks) the true peaks read −14.0 dBTP too. Then the
/// server stops mid-run: the status line says the input was lost and is being retried, with the
/// JACK reason; `q` quits with status 0 and the terminal is restored.
#[test]
fn jack_watch_draws_a_live_jack_input() {
    let test = "jack_watch_draws_a_live_jack_input";
    if skip_for_missing(
        test,
        &[
            ("bash", on_path("bash")),
            ("tmux", on_path("tmux")),
            ("jackd (package jackd2)", on_path("jackd")),
            (
                "jack_lsp and jack_connect (package jackd2)",
                on_path("jack_lsp") && on_path("jack_connect"),
            ),
            (
                "jack_simple_client (package jackd2)",
                on_path("jack_simple_client"),
            ),
            (
                "brink built with JACK (cargo test --features jack; needs libjack-jackd2-dev)",
                cfg!(feature = "jack"),
            ),
        ],
    ) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let server = JackServer::private(dir.path(), "watch");
    server.start();
    let env = server.client_env();
    let t = crate::dashboard::Tmux::start(
        &[
            "watch",
            "--host",
            "jack",
            "--channels",
            "1-2",
            "--rate",
            "48000",
        ],
        &[
            ("JACK_DEFAULT_SERVER", &server.name),
            ("JACK_NO_START_SERVER", "1"),
        ],
    );
    let s = t.wait_for("the dashboard on the JACK input", 30, |s| {
        s.contains("recent clips") && s.lines().last().is_some_and(|l| l.starts_with("input ok"))
    });
    let title = s.lines().next().unwrap_or("");
    assert!(
        title.contains(" live: jack: JACK Input · 48000 Hz · 2 ch "),
        "the title names host, device, rate and channels:\n{s}"
    );
    connect_tone(&env, Duration::from_secs(20));

    // Levels first (meter frames come 30 a second), then the fingerprint (a 1 s tone window).
    t.wait_for("both peaks at -14.0 dBFS", 30, |s| {
        meters_read(s, -13.98, false)
    });
    let s = t.wait_for("channel 1's fingerprint: 240 Hz, clean", 30, |s| {
        focus_is(s, 1, 240.0)
    });
    assert!(meters_read(&s, -13.98, false), "{s}");
    assert!(no_clips(&s), "a sine at -14 dBFS never clips:\n{s}");
    let status = s.lines().last().unwrap_or("");
    assert!(status.starts_with("input ok · dropped "), "{s}");

    // Focus on channel 2.
    t.keys(&["j"]);
    let s = t.wait_for("channel 2's fingerprint: 720 Hz, clean", 30, |s| {
        focus_is(s, 2, 720.0)
    });
    assert!(meters_read(&s, -13.98, false), "{s}");
    assert!(no_clips(&s), "{s}");

    // The true peaks: the moment the ports were connected is a step from silence into the sine,
    // and its interpolated peak overshoots the sine's (trial runs read -13.5 and -12.3 dBTP):
    // reset, then a steady sine's true peak equals its sample peak. A stray xrun on the dummy
    // driver can put a step in the stream again, so up to three resets.
    let mut s = String::new();
    for _ in 0..3 {
        t.keys(&["r"]);
        // Let the screen show what came after the reset (a screen from before it can only fail
        // the check below, and then the reset is tried again).
        std::thread::sleep(Duration::from_secs(1));
        s = t.wait_for("the reset and both true peaks again", 20, |s| {
            s.contains("peaks and counters reset")
                && (1..=2).all(|ch| {
                    crate::dashboard::meter_line(s, ch)
                        .is_some_and(|l| meter_numbers(&l).iter().all(Option::is_some))
                })
        });
        if meters_read(&s, -13.98, true) {
            break;
        }
    }
    assert!(
        meters_read(&s, -13.98, true),
        "true peaks after a reset:\n{s}"
    );
    for ch in 1..=2 {
        let l = crate::dashboard::meter_line(&s, ch).unwrap();
        let room = meter_numbers(&l)[2].unwrap();
        assert!(
            (room - 13.98).abs() <= 0.2,
            "headroom of channel {ch}:\n{s}"
        );
    }
    assert!(no_clips(&s), "{s}");

    // The server goes away mid-run: the status line says so in the dashboard's words, the
    // counters still in view on 80 columns, and the title marks the meters as last readings;
    // cpal's reason follows the counters (read it wide).
    server.stop();
    let lost = "INPUT LOST, retrying · dropped ";
    let s = t.wait_for("the input-lost status", 20, |s| {
        s.lines().last().is_some_and(|l| l.starts_with(lost))
    });
    assert!(
        s.lines().next().is_some_and(|l| l.contains("INPUT LOST")),
        "title marks the meters:\n{s}"
    );
    t.tmux(&["resize-window", "-x", "160", "-y", "24"]);
    let s = t.wait_for("the whole status line", 10, |s| {
        s.lines()
            .last()
            .is_some_and(|l| l.contains(" · JACK Input: JACK server shut down"))
    });
    assert!(s.lines().last().unwrap().starts_with(lost), "{s}");
    assert!(no_clips(&s), "{s}");

    t.keys(&["q"]);
    assert_eq!(t.exit_status(20), "exit=0");
    let s = t.screen();
    assert!(
        !s.contains("recent clips") && !s.contains("INPUT LOST"),
        "terminal restored:\n{s}"
    );
    assert!(
        !s.contains("brink watch:") && !s.contains("panicked"),
        "{s}"
    );
}

/// The example `jack_player` (a cpal output client on JACK), killed when dropped.
struct Player(Child);

impl Drop for Player {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// The JACK ports of client(s) whose name starts with `prefix` and whose port name contains
/// `kind` (":in_" or ":out_"), sorted; waits up to `limit` for at least `n` of them.
fn jack_ports(
    env: &[(&str, &OsStr)],
    prefix: &str,
    kind: &str,
    n: usize,
    limit: Duration,
) -> Vec<String> {
    let deadline = Instant::now() + limit;
    loop {
        let out = Command::new("jack_lsp")
            .envs(env.iter().copied())
            .stdin(Stdio::null())
            .output()
            .unwrap();
        let mut ports: Vec<String> = String::from_utf8_lossy(&out.stdout)
            .lines()
            .filter(|l| l.starts_with(prefix) && l.contains(kind))
            .map(str::to_string)
            .collect();
        ports.sort();
        if ports.len() >= n {
            return ports;
        }
        assert!(
            Instant::now() < deadline,
            "no {n} ports '{prefix}*{kind}*' appeared:\n{}",
            String::from_utf8_lossy(&out.stdout)
        );
        std::thread::sleep(Duration::from_millis(100));
    }
}

/// A cpal output client on JACK plays a clean 220 Hz tone, then the same tone flat-topped at
/// −6 dBFS (channel 1), and a clean 997 Hz tone at −12 dBFS (channel 2), into `brink log --host
/// jack`, its ports connected with `jack_connect`: the log shows the right fundamentals and
/// levels, then flat-top clip events at −6 ± 0.2 dBFS on channel 1 only.
#[test]
fn jack_capture_of_a_cpal_client_clean_then_flat_topped() {
    let test = "jack_capture_of_a_cpal_client_clean_then_flat_topped";
    if skip_for_missing(
        test,
        &[
            ("bash", on_path("bash")),
            ("jackd (package jackd2)", on_path("jackd")),
            (
                "jack_lsp and jack_connect (package jackd2)",
                on_path("jack_connect"),
            ),
            (
                "brink built with JACK (cargo test --features jack; needs libjack-jackd2-dev)",
                cfg!(feature = "jack"),
            ),
        ],
    ) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let server = JackServer::private(dir.path(), "flat");
    server.start_bare();
    let env = server.client_env();

    let wav = dir.path().join("stage.wav");
    brink()
        .arg("gen")
        .arg(&wav)
        .args([
            "clip:220@-6,drive=0..12/2",
            "sine:997@-12",
            "--length",
            "4s",
            "--bits",
            "f32",
        ])
        .assert()
        .success();
    let player = Player(
        Command::new(example_binary("jack_player"))
            .arg(&wav)
            .envs(env.iter().copied())
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap(),
    );
    let mut run = LogRun::spawn(
        dir.path(),
        &[
            "--host",
            "jack",
            "--channels",
            "1-2",
            "--rate",
            "48000",
            "--every",
            "250ms",
        ],
        &env,
        false,
    );
    let outs = jack_ports(
        &env,
        &format!("cpal_client_{}", player.0.id()),
        ":out_",
        2,
        Duration::from_secs(20),
    );
    // brink's own client: cpal's, with input ports.
    let ins = jack_ports(&env, "cpal_client_", ":in_", 2, Duration::from_secs(20));
    for (src, dst) in outs.iter().zip(&ins) {
        let status = Command::new("jack_connect")
            .envs(env.iter().copied())
            .args([src, dst])
            .stdin(Stdio::null())
            .status()
            .unwrap();
        assert!(status.success(), "jack_connect {src} {dst}");
    }
    run.wait_for(
        "flat-top clip records and clean summaries",
        Duration::from_secs(40),
        |recs| {
            recs.iter().filter(|r| kind_of(r) == "clip").count() >= 2
                && recs.iter().any(|r| {
                    kind_of(r) == "summary"
                        && f(&r["channels"][0]["fundamental_hz"])
                            .is_some_and(|x| (x - 220.0).abs() < 0.5)
                        && r["channels"][0]["flat_tops"] == 0
                })
        },
    );
    let (status, recs) = run.stop();
    let all = excerpt(&recs);
    assert_eq!(status.code(), Some(0), "{}\n{all}", run.stderr());
    drop(player);

    // Clean stretches: the right fundamentals and levels. A summary counts as clean when it and
    // the three before it (the 1 s tone window) saw no flat top on channel 1.
    let sums: Vec<&Value> = recs.iter().filter(|r| kind_of(r) == "summary").collect();
    let clean: Vec<&Value> = sums
        .windows(4)
        .filter(|w| w.iter().all(|r| r["channels"][0]["flat_tops"] == 0))
        .map(|w| w[3])
        .filter(|r| f(&r["channels"][0]["fundamental_hz"]).is_some())
        .collect();
    assert!(!clean.is_empty(), "{all}");
    for s in &clean {
        let (c1, c2) = (&s["channels"][0], &s["channels"][1]);
        assert!(
            (f(&c1["fundamental_hz"]).unwrap() - 220.0).abs() < 0.5,
            "{s}"
        );
        if let Some(p) = f(&c1["sample_peak_dbfs"]) {
            assert!((p + 6.0).abs() < 0.2, "{s}");
        }
        if let Some(hz) = f(&c2["fundamental_hz"]) {
            assert!((hz - 997.0).abs() < 0.5, "{s}");
            assert!(
                (f(&c2["sample_peak_dbfs"]).unwrap() + 12.0).abs() < 0.2,
                "{s}"
            );
        }
    }
    // Clipping: flat tops on channel 1 only, at the plateau level.
    let clips: Vec<&Value> = recs.iter().filter(|r| kind_of(r) == "clip").collect();
    assert!(clips.len() >= 2, "{all}");
    for c in &clips {
        assert_eq!(c["channel"], 1, "{c}");
        assert_eq!(c["clip"], "flat-top", "{c}");
        assert!((f(&c["level_dbfs"]).unwrap() + 6.0).abs() <= 0.2, "{c}");
    }
    check_accounting(&recs);
}

// ---------------------------------------------------------------------------------------------
// `brink sweep` on JACK: a stage under test (the example `jack_curve`) in the loop.

/// The example `jack_curve` (a JACK client applying a known curve, wiring itself between
/// brink's output and input), killed when dropped.
struct Stage(Child);

impl Drop for Stage {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// Where cargo put the example `name` (`jack_player`, `jack_curve`). `cargo test --features
/// jack` builds examples; a run filtered to one test target (`--test integration`) does not, so
/// say how to get it.
fn example_binary(name: &str) -> PathBuf {
    let exe = std::env::current_exe().unwrap();
    let path = exe
        .parent()
        .and_then(Path::parent)
        .unwrap()
        .join("examples")
        .join(name);
    assert!(
        path.exists(),
        "{} is missing: run `cargo test --features jack` (which builds examples) or \
         `cargo build --features jack --example {name}` first",
        path.display()
    );
    path
}

fn sweep_needs(test: &str) -> bool {
    skip_for_missing(
        test,
        &[
            ("bash", on_path("bash")),
            ("jackd (package jackd2)", on_path("jackd")),
            ("jack_lsp (package jackd2)", on_path("jack_lsp")),
            (
                "brink built with JACK (cargo test --features jack; needs libjack-jackd2-dev)",
                cfg!(feature = "jack"),
            ),
        ],
    )
}

/// A private server, and optionally a stage applying `curve` (its output in `dir/stage.log`).
/// Returns the server guard and the stage guard.
fn sweep_rig(dir: &Path, tag: &str, curve: Option<&str>) -> (JackServer, Option<Stage>) {
    let server = JackServer::private(dir, tag);
    server.start_bare();
    let env = server.client_env();
    let stage = curve.map(|c| {
        let log = std::fs::File::create(dir.join("stage.log")).unwrap();
        Stage(
            Command::new(example_binary("jack_curve"))
                .arg(c)
                .envs(env)
                .stdin(Stdio::null())
                .stdout(log.try_clone().unwrap())
                .stderr(log)
                .spawn()
                .unwrap(),
        )
    });
    (server, stage)
}

/// Run `brink sweep --host jack --json ARGS` to the end (at most `limit`).
fn sweep_run(
    env: &[(&str, &OsStr)],
    args: &[&str],
    limit: Duration,
) -> (ExitStatus, String, String) {
    let out = brink()
        .args(["sweep", "--host", "jack", "--json"])
        .args(args)
        .envs(env.iter().copied())
        .timeout(limit)
        .output()
        .unwrap();
    (
        out.status,
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// THD_F (%) of a unit sine of amplitude `a` hard-clipped at ±`c`, over H3..H19 (the odd
/// harmonics of 997 Hz inside the 20 kHz band), from the Fourier series of a clipped sine:
/// α = arcsin(c/a), b_n = (2/(πn))·[S(n−1) + S(n+1)], S(m) = sin(mα)/m, S(0) = α
/// (../shared/reference-values.md, "Symmetric hard clip").
fn clipped_sine_thd_pct(a: f64, c: f64) -> f64 {
    if a <= c {
        return 0.0;
    }
    let alpha = (c / a).asin();
    let s = |m: i32| {
        if m == 0 {
            alpha
        } else {
            (f64::from(m) * alpha).sin() / f64::from(m)
        }
    };
    let b = |n: i32| 2.0 / (PI * f64::from(n)) * (s(n - 1) + s(n + 1));
    let h: f64 = (3..20).step_by(2).map(|n| b(n).powi(2)).sum();
    100.0 * h.sqrt() / b(1)
}

/// The drive (dBFS) at which that THD reaches `pct`, by bisection on the closed form.
fn clipped_sine_onset_dbfs(c: f64, pct: f64) -> f64 {
    let (mut lo, mut hi) = (c, 1.0);
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if clipped_sine_thd_pct(mid, c) < pct {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    20.0 * lo.log10()
}

/// A symmetric hard clip at 0.25 (−12.04 dBFS) in a JACK loop: the sweep's onset (THD 1 %)
/// matches the closed-form Fourier series of a clipped sine within 0.3 dB, the harmonics are
/// odd only, the knee is steep, and below the clip the loop returns the drive unchanged.
#[test]
fn jack_sweep_of_a_hard_clip_finds_the_closed_form_onset() {
    let test = "jack_sweep_of_a_hard_clip_finds_the_closed_form_onset";
    if sweep_needs(test) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let (server, _stage) = sweep_rig(dir.path(), "clip", Some("hardclip:0.25"));
    let env = server.client_env();
    let svg = dir.path().join("clip.svg");
    let (status, stdout, stderr) = sweep_run(
        &env,
        &[
            "--svg",
            svg.to_str().unwrap(),
            "--from",
            "-16",
            "--to",
            "-8",
            "--step",
            "0.5",
            "--settle",
            "100ms",
            "--measure",
            "250ms",
            "--wait",
            "20s",
        ],
        Duration::from_secs(120),
    );
    assert!(
        status.success(),
        "{status}\n{stderr}\n{stdout}\nstage: {}",
        std::fs::read_to_string(dir.path().join("stage.log")).unwrap_or_default()
    );
    assert!(stderr.contains("CAUTION"), "{stderr}");
    let doc: Value = serde_json::from_str(stdout.trim()).expect("one JSON document");
    assert_eq!(doc["format"], "brink-sweep-1");
    assert_eq!(doc["frequency_hz"], 997.0);
    let steps = doc["steps"].as_array().unwrap();
    // 17 steps from −16 to −8 dBFS, and 4 refining ones between the two around the onset,
    // never above the top drive; all sorted by drive.
    let refined = steps.iter().filter(|s| s["refined"] == true).count();
    assert_eq!((steps.len(), refined), (21, 4), "{doc}");
    let drives: Vec<f64> = steps.iter().map(|s| f(&s["drive_dbfs"]).unwrap()).collect();
    assert!(
        drives.windows(2).all(|w| w[0] <= w[1]) && drives[20] == -8.0,
        "{drives:?}"
    );
    let want = clipped_sine_onset_dbfs(0.25, 1.0);
    let got = f(&doc["onset"]["drive_dbfs"]).expect("an onset");
    assert!(
        (got - want).abs() <= 0.3,
        "onset {got} dBFS, closed form {want:.3} dBFS"
    );
    assert_eq!(f(&doc["onset"]["thd_pct"]), Some(1.0));
    // Below the clip the loop has unity gain: return = drive (floats pass JACK unchanged).
    for s in steps
        .iter()
        .filter(|s| f(&s["drive_dbfs"]).unwrap() <= -13.0)
    {
        let (d, r) = (f(&s["drive_dbfs"]).unwrap(), f(&s["return_dbfs"]).unwrap());
        assert!((r - d).abs() < 0.05, "{s}");
    }
    // Well into clipping: the closed-form THD, odd harmonics only.
    let top = steps.last().unwrap();
    let thd_want = clipped_sine_thd_pct(10f64.powf(-8.0 / 20.0), 0.25);
    let thd = f(&top["thd_pct"]).unwrap();
    assert!(
        (thd / thd_want - 1.0).abs() < 0.02,
        "THD {thd} %, closed form {thd_want} %"
    );
    let h = &top["harmonics_dbc"];
    for even in ["2", "4", "6", "8", "10"] {
        assert!(f(&h[even]).is_none_or(|v| v < -80.0), "H{even}: {top}");
    }
    assert!(f(&h["3"]).unwrap() > -30.0, "{top}");
    assert!(f(&top["odd_even_db"]).is_none_or(|v| v < -20.0), "{top}");
    let knee = &doc["knee"];
    assert!(f(&knee["steepest_db_per_db"]).unwrap() > 3.0, "{doc}");
    assert!(
        (f(&knee["drive_dbfs"]).unwrap() - want).abs() <= 1.0,
        "{doc}"
    );
    // The figure: both panels, the onset marked with its value.
    let fig = std::fs::read_to_string(&svg).unwrap();
    assert!(fig.starts_with("<svg"), "{}", &fig[..fig.len().min(200)]);
    for text in [
        "Level sweep at 997 Hz",
        "THD (%)",
        "onset: THD 1 % at -11.8 dBFS",
        "H3 (odd)",
    ] {
        assert!(fig.contains(text), "{text} missing from the figure");
    }
}

/// An asymmetric square-law stage y = x + 0.5·x²: H2 only, at 20·log10(0.5·A/2) dBc (the
/// product-to-sum identity sin² = (1 − cos 2θ)/2), a positive odd/even balance, THD rising 1 dB
/// per dB (no knee) and the onset where 0.25·A = 1 %, A = 0.04 (−27.96 dBFS).
#[test]
fn jack_sweep_of_an_asymmetric_stage_is_even_rich() {
    let test = "jack_sweep_of_an_asymmetric_stage_is_even_rich";
    if sweep_needs(test) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let (server, _stage) = sweep_rig(dir.path(), "asym", Some("square:0.5"));
    let env = server.client_env();
    let (status, stdout, stderr) = sweep_run(
        &env,
        &[
            "--from",
            "-36",
            "--to",
            "-20",
            "--step",
            "2",
            "--settle",
            "100ms",
            "--measure",
            "250ms",
            "--wait",
            "20s",
        ],
        Duration::from_secs(120),
    );
    assert!(
        status.success(),
        "{status}\n{stderr}\n{stdout}\nstage: {}",
        std::fs::read_to_string(dir.path().join("stage.log")).unwrap_or_default()
    );
    let doc: Value = serde_json::from_str(stdout.trim()).expect("one JSON document");
    for s in doc["steps"].as_array().unwrap() {
        let a = 10f64.powf(f(&s["drive_dbfs"]).unwrap() / 20.0);
        let h2 = f(&s["harmonics_dbc"]["2"]).unwrap();
        let want = 20.0 * (0.25 * a).log10();
        assert!(
            (h2 - want).abs() < 0.1,
            "H2 {h2} dBc, closed form {want:.3}: {s}"
        );
        assert!(f(&s["odd_even_db"]).unwrap() > 20.0, "{s}");
    }
    let got = f(&doc["onset"]["drive_dbfs"]).expect("an onset");
    let want = 20.0 * 0.04f64.log10();
    assert!(
        (got - want).abs() <= 0.3,
        "onset {got}, closed form {want:.3}"
    );
    assert!(doc["knee"].is_null(), "{doc}");
}

/// Nothing in the loop: the sweep waits, then stops with the clear error, having played only
/// the lowest drive; its output ports are gone once it has exited.
#[test]
fn jack_sweep_without_a_return_stops_with_a_clear_error() {
    let test = "jack_sweep_without_a_return_stops_with_a_clear_error";
    if sweep_needs(test) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let (server, _stage) = sweep_rig(dir.path(), "open", None);
    let env = server.client_env();
    let started = Instant::now();
    let (status, stdout, stderr) = sweep_run(
        &env,
        &["--from", "-40", "--to", "-20", "--wait", "2s"],
        Duration::from_secs(60),
    );
    assert_eq!(status.code(), Some(1), "{stderr}\n{stdout}");
    assert!(
        stderr.contains("no signal returns on input 1: check the loop"),
        "{stderr}"
    );
    assert!(stderr.contains("-40.0 dBFS"), "{stderr}");
    assert!(stderr.contains("the output is stopped"), "{stderr}");
    assert!(stdout.trim().is_empty(), "no report: {stdout}");
    assert!(started.elapsed() >= Duration::from_secs(2), "it waited");
    let lsp = Command::new("jack_lsp")
        .envs(env)
        .stdin(Stdio::null())
        .output()
        .unwrap();
    let ports = String::from_utf8_lossy(&lsp.stdout);
    assert!(!ports.contains("_out:out_0"), "{ports}");
}

/// The square-law stage y = x + 0.5·x² again, swept over frequency at −30 dBFS and with the
/// SMPTE pair. Frequency: the return equals the drive (the x term has unity gain) and H2 sits at
/// 20·log10(0.25·A) dBc at every frequency whose H2 lies inside the 20 kHz band. SMPTE (60 Hz +
/// 7 kHz, 4:1, RP120): the cross term 2·A1·A2·sin ω1t·sin ω2t puts 0.5·A1·A2 at f2 − f1 and at
/// f2 + f1 (product-to-sum identity) and nothing further out, so IMD re A2 = √2·0.5·A1 with
/// A1 = 0.8·A.
#[test]
fn jack_sweep_over_frequency_and_with_the_smpte_pair() {
    let test = "jack_sweep_over_frequency_and_with_the_smpte_pair";
    if sweep_needs(test) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let (server, _stage) = sweep_rig(dir.path(), "freq", Some("square:0.5"));
    let env = server.client_env();
    let (status, stdout, stderr) = sweep_run(
        &env,
        &[
            "--freqs",
            "100..6400",
            "--per-octave",
            "1",
            "--drive",
            "-30",
            "--settle",
            "100ms",
            "--measure",
            "250ms",
            "--wait",
            "20s",
        ],
        Duration::from_secs(120),
    );
    assert!(
        status.success(),
        "{status}\n{stderr}\n{stdout}\nstage: {}",
        std::fs::read_to_string(dir.path().join("stage.log")).unwrap_or_default()
    );
    let doc: Value = serde_json::from_str(stdout.trim()).expect("one JSON document");
    assert_eq!(doc["kind"], "frequency");
    assert!(
        doc["onset"].is_null() && doc["frequency_hz"].is_null(),
        "{doc}"
    );
    let steps = doc["steps"].as_array().unwrap();
    // 100 · 2^k up to 6400: 7 points.
    assert_eq!(steps.len(), 7, "{doc}");
    let a = 10f64.powf(-30.0 / 20.0);
    for (k, s) in steps.iter().enumerate() {
        let want_f = 100.0 * 2f64.powi(k as i32);
        assert!(
            (f(&s["frequency_hz"]).unwrap() - want_f).abs() < 1e-6,
            "{s}"
        );
        assert!((f(&s["return_hz"]).unwrap() - want_f).abs() < 0.01, "{s}");
        assert!((f(&s["return_dbfs"]).unwrap() + 30.0).abs() < 0.05, "{s}");
        let h2 = f(&s["harmonics_dbc"]["2"]).unwrap();
        assert!((h2 - 20.0 * (0.25 * a).log10()).abs() < 0.1, "{s}");
    }

    let (status, stdout, stderr) = sweep_run(
        &env,
        &[
            "--imd",
            "smpte",
            "--from",
            "-30",
            "--to",
            "-20",
            "--step",
            "5",
            "--settle",
            "100ms",
            "--measure",
            "500ms",
            "--wait",
            "20s",
        ],
        Duration::from_secs(120),
    );
    assert!(
        status.success(),
        "{status}\n{stderr}\n{stdout}\nstage: {}",
        std::fs::read_to_string(dir.path().join("stage.log")).unwrap_or_default()
    );
    let doc: Value = serde_json::from_str(stdout.trim()).expect("one JSON document");
    let steps = doc["steps"].as_array().unwrap();
    assert_eq!(steps.len(), 3, "{doc}");
    for s in steps {
        let a1 = 0.8 * 10f64.powf(f(&s["drive_dbfs"]).unwrap() / 20.0);
        let want = 100.0 * 2f64.sqrt() * 0.5 * a1;
        let got = f(&s["imd_pct"]).unwrap();
        assert!(
            (got / want - 1.0).abs() < 0.02,
            "IMD {got} %, closed form {want} %: {s}"
        );
        assert!(s["thd_pct"].is_null(), "{s}");
    }
}

/// Ctrl-C in the middle of a sweep: the tone stops, the sweep says it was interrupted and how
/// many steps it had measured, prints no report, exits 1, and its output ports are gone.
#[test]
fn jack_sweep_stops_on_ctrl_c() {
    let test = "jack_sweep_stops_on_ctrl_c";
    if sweep_needs(test) {
        return;
    }
    let _one = one_at_a_time();
    let dir = tempfile::tempdir().unwrap();
    let (server, _stage) = sweep_rig(dir.path(), "int", Some("gain:1"));
    let env = server.client_env();
    let err_path = dir.path().join("stderr");
    let child = Command::new(assert_cmd::cargo::cargo_bin("brink"))
        .args([
            "sweep", "--host", "jack", "--json", "--from", "-40", "--to", "-20", "--step", "0.5",
            "--settle", "200ms", "--wait", "20s",
        ])
        .envs(env)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(std::fs::File::create(&err_path).unwrap())
        .spawn()
        .unwrap();
    // Wait for two measured steps (the table goes to stderr with --json).
    let deadline = Instant::now() + Duration::from_secs(60);
    let steps_seen = |text: &str| {
        text.lines()
            .filter(|l| l.trim_start().starts_with("-3") || l.trim_start().starts_with("-40"))
            .count()
    };
    while steps_seen(&std::fs::read_to_string(&err_path).unwrap_or_default()) < 2 {
        assert!(
            Instant::now() < deadline,
            "no steps: {}",
            std::fs::read_to_string(&err_path).unwrap_or_default()
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    let status = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(status.success());
    let out = child.wait_with_output().unwrap();
    let stderr = std::fs::read_to_string(&err_path).unwrap();
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(
        stderr.contains("brink sweep: interrupted (the output is stopped)"),
        "{stderr}"
    );
    assert!(
        stderr.contains("steps measured before it stopped"),
        "{stderr}"
    );
    assert!(out.stdout.is_empty(), "no report on stdout");
    let lsp = Command::new("jack_lsp")
        .envs(env)
        .stdin(Stdio::null())
        .output()
        .unwrap();
    let ports = String::from_utf8_lossy(&lsp.stdout);
    assert!(!ports.contains("_out:out_0"), "{ports}");
}
