//! Opens rendered reports in headless Chromium and inspects the live page.
//!
//! Method: Chromium is started with `--remote-debugging-pipe`, which speaks the
//! DevTools protocol as NUL-terminated JSON on file descriptors 3 (in) and 4 (out);
//! a `sh -c exec` wrapper maps those onto the child's stdin and stdout. The test
//! enables the `Runtime`, `Log` and `Page` domains, loads the report from a
//! `file://` URL, waits for the load event, then:
//! - evaluates DOM queries in the page (matrix cells, a laid-out curve plot inside
//!   a pair panel, the caution text, resource loads);
//! - counts problems: `Runtime.exceptionThrown`, `Runtime.consoleAPICalled` of type
//!   error/assert/warning, `Log.entryAdded` at level error or warning (this is where
//!   failed resource loads and blocked requests are reported), and any `CONSOLE`
//!   line in Chromium's stderr log (`--enable-logging=stderr --v=0`).
//!
//! The pages are the demo scenario's report as `ccm-triage demo` writes it, and two synthetic
//! view models (6 and 40 variables) rendered directly; a second test loads a deliberately
//! broken page to show that each detector fires.
//!
//! The tests skip with a printed reason when Chromium is absent, and fail instead
//! when `CI=true`, so CI cannot pass by skipping.

#[path = "../crates/review-report/tests/common/mod.rs"]
mod samples;

use std::io::{BufRead, BufReader, Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, Stdio};
use std::sync::mpsc::{Receiver, channel};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use serde_json::{Value, json};

const TIMEOUT: Duration = Duration::from_secs(60);

/// Finds Chromium, or explains why the test cannot run.
fn chromium() -> Option<PathBuf> {
    let candidates = ["/usr/bin/chromium", "/usr/bin/chromium-browser"];
    if let Some(p) = candidates.iter().map(PathBuf::from).find(|p| p.exists()) {
        return Some(p);
    }
    let reason = "headless Chromium not found at /usr/bin/chromium (Debian package `chromium`)";
    if std::env::var("CI").as_deref() == Ok("true") {
        panic!("CI=true and {reason}; the CI script must install it");
    }
    eprintln!("SKIPPED browser test: {reason}");
    None
}

struct Browser {
    child: Child,
    stdin: ChildStdin,
    rx: Receiver<Value>,
    next_id: u64,
    events: Vec<Value>,
    stderr_lines: Arc<Mutex<Vec<String>>>,
    _profile: tempfile::TempDir,
}

impl Browser {
    fn launch(exe: &Path) -> Browser {
        let profile = tempfile::tempdir().unwrap();
        let mut child = Command::new("sh")
            .arg("-c")
            .arg(r#"exec "$0" "$@" 3<&0 4>&1 0</dev/null 1>/dev/null"#)
            .arg(exe)
            .args([
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                "--remote-debugging-pipe",
                "--enable-logging=stderr",
                "--v=0",
                "--window-size=1400,2000",
            ])
            .arg(format!("--user-data-dir={}", profile.path().display()))
            .arg("about:blank")
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .expect("start chromium");
        let stdin = child.stdin.take().unwrap();
        let mut stdout = child.stdout.take().unwrap();
        let stderr = child.stderr.take().unwrap();
        let (tx, rx) = channel();
        std::thread::spawn(move || {
            let mut buf = Vec::new();
            let mut chunk = [0u8; 64 * 1024];
            while let Ok(n) = stdout.read(&mut chunk) {
                if n == 0 {
                    break;
                }
                buf.extend_from_slice(&chunk[..n]);
                while let Some(end) = buf.iter().position(|&b| b == 0) {
                    let msg: Vec<u8> = buf.drain(..=end).collect();
                    if let Ok(v) = serde_json::from_slice::<Value>(&msg[..msg.len() - 1])
                        && tx.send(v).is_err()
                    {
                        return;
                    }
                }
            }
        });
        let stderr_lines = Arc::new(Mutex::new(Vec::new()));
        let sink = Arc::clone(&stderr_lines);
        std::thread::spawn(move || {
            for line in BufReader::new(stderr).lines().map_while(Result::ok) {
                sink.lock().unwrap().push(line);
            }
        });
        Browser {
            child,
            stdin,
            rx,
            next_id: 0,
            events: Vec::new(),
            stderr_lines,
            _profile: profile,
        }
    }

    fn call(&mut self, session: Option<&str>, method: &str, params: Value) -> Value {
        self.next_id += 1;
        let id = self.next_id;
        let mut msg = json!({"id": id, "method": method, "params": params});
        if let Some(s) = session {
            msg["sessionId"] = json!(s);
        }
        let mut bytes = serde_json::to_vec(&msg).unwrap();
        bytes.push(0);
        self.stdin.write_all(&bytes).unwrap();
        self.stdin.flush().unwrap();
        let deadline = Instant::now() + TIMEOUT;
        loop {
            let v = self.recv_before(deadline, &format!("answer to {method}"));
            if v.get("id").and_then(Value::as_u64) == Some(id) {
                if let Some(err) = v.get("error") {
                    panic!("{method} failed: {err}");
                }
                return v["result"].clone();
            }
            self.events.push(v);
        }
    }

    /// The next message from the browser, failing the test at `deadline` with "no `what`".
    fn recv_before(&self, deadline: Instant, what: &str) -> Value {
        let left = deadline.saturating_duration_since(Instant::now());
        self.rx
            .recv_timeout(left)
            .unwrap_or_else(|_| panic!("no {what} within {TIMEOUT:?}"))
    }

    fn wait_event(&mut self, session: &str, method: &str) {
        let is_it = |v: &Value| v["method"] == method && v["sessionId"] == session;
        if self.events.iter().any(is_it) {
            return;
        }
        let deadline = Instant::now() + TIMEOUT;
        loop {
            let v = self.recv_before(deadline, &format!("{method} event"));
            let hit = is_it(&v);
            self.events.push(v);
            if hit {
                return;
            }
        }
    }

    /// Opens `url` in a fresh tab; returns the session id once the page has loaded.
    fn open(&mut self, url: &str) -> String {
        let target = self.call(None, "Target.createTarget", json!({"url": "about:blank"}));
        let target_id = target["targetId"].as_str().unwrap().to_owned();
        let attached = self.call(
            None,
            "Target.attachToTarget",
            json!({"targetId": target_id, "flatten": true}),
        );
        let session = attached["sessionId"].as_str().unwrap().to_owned();
        for domain in ["Runtime.enable", "Log.enable", "Page.enable"] {
            self.call(Some(&session), domain, json!({}));
        }
        self.call(Some(&session), "Page.navigate", json!({"url": url}));
        self.wait_event(&session, "Page.loadEventFired");
        session
    }

    fn eval(&mut self, session: &str, expression: &str) -> Value {
        let r = self.call(
            Some(session),
            "Runtime.evaluate",
            json!({"expression": expression, "returnByValue": true}),
        );
        assert!(r.get("exceptionDetails").is_none(), "evaluation threw: {r}");
        r["result"]["value"].clone()
    }

    /// Problems the page reported, in words.
    fn problems(&mut self, session: &str) -> Vec<String> {
        // A round trip after load lets late messages arrive before counting.
        self.eval(session, "1");
        let mut out = Vec::new();
        for e in self.events.iter().filter(|e| e["sessionId"] == session) {
            let p = &e["params"];
            match e["method"].as_str().unwrap_or("") {
                "Runtime.exceptionThrown" => {
                    out.push(format!("exception: {}", p["exceptionDetails"]))
                }
                "Runtime.consoleAPICalled"
                    if matches!(p["type"].as_str(), Some("error" | "assert" | "warning")) =>
                {
                    out.push(format!("console {}: {}", p["type"], p["args"]))
                }
                "Log.entryAdded"
                    if matches!(p["entry"]["level"].as_str(), Some("error" | "warning")) =>
                {
                    out.push(format!(
                        "log {}: {}",
                        p["entry"]["level"], p["entry"]["text"]
                    ))
                }
                _ => {}
            }
        }
        out
    }

    fn stderr_console_lines(&self) -> Vec<String> {
        self.stderr_lines
            .lock()
            .unwrap()
            .iter()
            .filter(|l| l.contains(":CONSOLE") || l.contains("Uncaught"))
            .cloned()
            .collect()
    }

    /// Click the element `selector` picks (the `index`-th match) with real mouse events at
    /// its centre, after scrolling it into view.
    fn click(&mut self, session: &str, selector: &str, index: usize) {
        let rect = self.eval(
            session,
            &format!(
                "(() => {{ const e = document.querySelectorAll({sel})[{index}]; \
                 e.scrollIntoView({{block: 'center'}}); const r = e.getBoundingClientRect(); \
                 return [r.left + r.width / 2, r.top + r.height / 2]; }})()",
                sel = json!(selector)
            ),
        );
        let (x, y) = (rect[0].as_f64().unwrap(), rect[1].as_f64().unwrap());
        for kind in ["mousePressed", "mouseReleased"] {
            self.call(
                Some(session),
                "Input.dispatchMouseEvent",
                json!({"type": kind, "x": x, "y": y, "button": "left", "clickCount": 1}),
            );
        }
    }

    /// Type `text` into the focused element, as a keyboard would.
    fn type_text(&mut self, session: &str, text: &str) {
        self.call(Some(session), "Input.insertText", json!({"text": text}));
    }

    /// Reload the page and wait for its load event.
    fn reload(&mut self, session: &str) {
        self.events
            .retain(|e| !(e["method"] == "Page.loadEventFired" && e["sessionId"] == session));
        self.call(Some(session), "Page.reload", json!({}));
        self.wait_event(session, "Page.loadEventFired");
    }

    /// Wait for a browser-wide event whose params satisfy `pred`.
    fn wait_browser_event(&mut self, method: &str, pred: impl Fn(&Value) -> bool) -> Value {
        if let Some(e) = self
            .events
            .iter()
            .find(|e| e["method"] == method && pred(&e["params"]))
        {
            return e.clone();
        }
        let deadline = Instant::now() + TIMEOUT;
        loop {
            let v = self.recv_before(deadline, &format!("{method} event"));
            self.events.push(v.clone());
            if v["method"] == method && pred(&v["params"]) {
                return v;
            }
        }
    }

    fn close(mut self) {
        let _ = self.call(None, "Browser.close", json!({}));
        let deadline = Instant::now() + Duration::from_secs(10);
        while Instant::now() < deadline {
            if let Ok(Some(_)) = self.child.try_wait() {
                return;
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn file_url(p: &Path) -> String {
    format!("file://{}", p.display())
}

const PAGE_FACTS: &str = r#"(() => {
  const m = document.getElementById('matrix');
  const svg = document.querySelector('details.pair[open] figure.curve svg');
  const box = svg ? svg.getBoundingClientRect() : {width: 0, height: 0};
  const caution = document.getElementById('caution');
  return {
    cells: m ? m.querySelectorAll('td.cell').length : -1,
    rows: m ? m.tBodies[0].rows.length : -1,
    curve_svgs: document.querySelectorAll('details.pair figure.curve svg').length,
    curve_texts: svg ? svg.querySelectorAll('text').length : 0,
    curve_width: box.width, curve_height: box.height,
    caution: caution ? caution.textContent : '',
    caution_height: caution ? caution.getBoundingClientRect().height : 0,
    first_group: document.querySelector('section.group').id,
    resources: performance.getEntriesByType('resource').length,
    scripts: Array.from(document.scripts).filter(s => !s.src).length
      + 1000 * Array.from(document.scripts).filter(s => s.src).length,
  };
})()"#;

#[test]
fn report_renders_in_chromium_without_console_errors() {
    let Some(exe) = chromium() else { return };
    let dir = tempfile::tempdir().unwrap();
    let mut browser = Browser::launch(&exe);
    let demo = demo_report(dir.path());
    let mut pages = vec![("demo report", demo, 7u64)];
    for (name, data) in [
        ("small.html", samples::small()),
        ("wide.html", samples::wide(40)),
    ] {
        let path = dir.path().join(name);
        std::fs::write(&path, review_report::render_html(&data).unwrap()).unwrap();
        pages.push((name, path, data.variables.len() as u64));
    }
    for (name, path, n) in pages {
        let session = browser.open(&file_url(&path));
        let facts = browser.eval(&session, PAGE_FACTS);
        assert_eq!(facts["cells"], json!(n * n), "{name}: {facts}");
        assert_eq!(facts["rows"], json!(n), "{name}: {facts}");
        assert!(facts["curve_svgs"].as_u64().unwrap() > 0, "{name}: {facts}");
        assert!(
            facts["curve_texts"].as_u64().unwrap() >= 5,
            "{name}: axis text missing: {facts}"
        );
        // The open review panel's plot must be laid out at a readable size.
        assert!(
            facts["curve_width"].as_f64().unwrap() > 300.0,
            "{name}: {facts}"
        );
        assert!(
            facts["caution"]
                .as_str()
                .unwrap()
                .contains(review_report::CAUTION)
        );
        assert!(facts["caution_height"].as_f64().unwrap() > 20.0);
        assert_eq!(facts["first_group"], "group-rev");
        // Self-contained: nothing fetched; the one script is inline (the decision form).
        assert_eq!(facts["resources"], json!(0), "{name}: {facts}");
        assert_eq!(facts["scripts"], json!(1));
        let problems = browser.problems(&session);
        assert!(problems.is_empty(), "{name}: page reported {problems:#?}");
    }
    let console = browser.stderr_console_lines();
    browser.close();
    assert!(console.is_empty(), "console lines in stderr: {console:#?}");
}

/// Runs `ccm-triage demo` into `dir` and returns the report it wrote.
fn demo_report(dir: &Path) -> PathBuf {
    let status = Command::new(env!("CARGO_BIN_EXE_ccm-triage"))
        .args(["demo", "--quiet", "--out"])
        .arg(dir.join("demo"))
        .stdout(Stdio::null())
        .status()
        .expect("run ccm-triage demo");
    assert!(status.success(), "ccm-triage demo failed");
    dir.join("demo").join("scan").join("report.html")
}

#[test]
fn error_detection_catches_a_broken_page() {
    let Some(exe) = chromium() else { return };
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("broken.html");
    std::fs::write(
        &path,
        "<!DOCTYPE html><html><body><img src=\"missing.png\">\
         <script>console.error('planted'); notDefined();</script></body></html>",
    )
    .unwrap();
    let mut browser = Browser::launch(&exe);
    let session = browser.open(&file_url(&path));
    let problems = browser.problems(&session);
    let console = browser.stderr_console_lines();
    browser.close();
    let has = |s: &str| problems.iter().any(|p| p.contains(s));
    assert!(has("exception"), "{problems:#?}");
    assert!(has("planted"), "{problems:#?}");
    assert!(
        has("missing.png") || has("ERR_FILE_NOT_FOUND"),
        "{problems:#?}"
    );
    assert!(
        console.iter().any(|l| l.contains("planted")),
        "{console:#?}"
    );
}

/// A reviewer marks two pairs in the demo report, reloads the page (the marks persist in the
/// browser), exports them, and the file's bytes are checked; then `scan --decisions` shows
/// them in labels.csv and `train` learns from them as extra labelled rows.
#[test]
fn reviewer_marks_pairs_exports_them_and_train_uses_them() {
    let Some(exe) = chromium() else { return };
    let dir = tempfile::tempdir().unwrap();
    let scan = dir.path().join("scan");
    let status = Command::new(env!("CARGO_BIN_EXE_ccm-triage"))
        .args(["scan", "--quiet", SOUND, "--out"])
        .arg(&scan)
        .args(FAST)
        .stdout(Stdio::null())
        .status()
        .unwrap();
    assert!(status.success());
    let report = scan.join("report.html");
    let run: Value =
        serde_json::from_str(&std::fs::read_to_string(scan.join("run.json")).unwrap()).unwrap();
    let sha = run["input"]["sha256"].as_str().unwrap().to_owned();
    let downloads = dir.path().join("downloads");
    std::fs::create_dir(&downloads).unwrap();

    let mut browser = Browser::launch(&exe);
    browser.call(
        None,
        "Browser.setDownloadBehavior",
        json!({"behavior": "allow", "downloadPath": downloads.display().to_string(), "eventsEnabled": true}),
    );
    let session = browser.open(&file_url(&report));
    // Open the first two panels as a reader would, then read which pairs they are.
    browser.eval(
        &session,
        "document.querySelectorAll('details.pair').forEach((d, i) => { if (i < 2) d.open = true; })",
    );
    let pairs = browser.eval(
        &session,
        "Array.from(document.querySelectorAll('details.pair fieldset.decide')).slice(0, 2)\
         .map(f => [f.dataset.driver, f.dataset.response])",
    );
    let pair = |k: usize| {
        (
            pairs[k][0].as_str().unwrap().to_owned(),
            pairs[k][1].as_str().unwrap().to_owned(),
        )
    };
    browser.click(&session, "#reviewer", 0);
    browser.type_text(&session, "A. Lee");
    browser.click(
        &session,
        "details.pair fieldset.decide input[value=causal]",
        0,
    );
    browser.click(&session, "details.pair fieldset.decide input.note", 0);
    browser.type_text(&session, "lag fits, \"known\" link");
    browser.click(
        &session,
        "details.pair fieldset.decide input[value=non-causal]",
        1,
    );

    // Kept in the browser: a reload shows the same marks.
    browser.reload(&session);
    let state = browser.eval(
        &session,
        "(() => { const f = document.querySelectorAll('details.pair fieldset.decide'); \
         const c = i => { const r = f[i].querySelector('input:checked'); return r ? r.value : null; }; \
         return [c(0), f[0].querySelector('input.note').value, c(1), \
         document.getElementById('reviewer').value, document.getElementById('decision-count').textContent]; })()",
    );
    assert_eq!(
        state,
        json!([
            "causal",
            "lag fits, \"known\" link",
            "non-causal",
            "A. Lee",
            "2 decisions kept in this browser"
        ])
    );

    browser.click(&session, "#export-decisions", 0);
    browser.wait_browser_event("Browser.downloadProgress", |p| p["state"] == "completed");
    let problems = browser.problems(&session);
    browser.close();
    assert!(problems.is_empty(), "page reported {problems:#?}");

    let bytes = std::fs::read(downloads.join("decisions.csv")).unwrap();
    let text = String::from_utf8(bytes.clone()).unwrap();
    // decided_at is the moment of the click: take it from the file, check its form, and
    // compare every other byte exactly.
    let stamps: Vec<&str> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').rev().nth(1).unwrap())
        .collect();
    for s in &stamps {
        assert!(
            s.len() == 24 && s.ends_with('Z') && &s[10..11] == "T",
            "decided_at {s:?} is not an ISO 8601 UTC time"
        );
    }
    let ((d0, r0), (d1, r1)) = (pair(0), pair(1));
    let expected = format!(
        "driver,response,decision,note,reviewer,decided_at,input_sha256\n\
         {d0},{r0},causal,\"lag fits, \"\"known\"\" link\",A. Lee,{},{sha}\n\
         {d1},{r1},non-causal,,A. Lee,{},{sha}\n",
        stamps[0], stamps[1]
    );
    assert_eq!(text, expected);
    assert_eq!(bytes, expected.as_bytes());

    decisions_flow_into_scan_and_train(dir.path(), &downloads.join("decisions.csv"), (&d0, &r0));
}

/// The demo scenario's table, and settings quick enough for a test (training uses them too).
const SOUND: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data/sound.csv");
const FAST: [&str; 2] = ["--replicates", "20"];

/// The exported file, given to `scan --decisions`, shows in labels.csv and the report; given to
/// `train --decisions` with the scan it came from, it adds reviewed rows to a small model.
fn decisions_flow_into_scan_and_train(dir: &Path, decisions: &Path, first: (&str, &str)) {
    let bin = env!("CARGO_BIN_EXE_ccm-triage");
    let scan = dir.join("again");
    let status = Command::new(bin)
        .args(["scan", "--quiet", SOUND, "--out"])
        .arg(&scan)
        .args(FAST)
        .arg("--decisions")
        .arg(decisions)
        .stdout(Stdio::null())
        .status()
        .unwrap();
    assert!(status.success());
    let labels = std::fs::read_to_string(scan.join("labels.csv")).unwrap();
    let header = labels.lines().next().unwrap();
    assert!(
        header.ends_with(",reviewer_decision,reviewer_note,reviewer,decided_at"),
        "{header}"
    );
    let mut rdr = csv::Reader::from_reader(labels.as_bytes());
    let rows: Vec<csv::StringRecord> = rdr.records().map(Result::unwrap).collect();
    let hit = rows
        .iter()
        .find(|r| &r[0] == first.0 && &r[1] == first.1)
        .unwrap();
    let n = hit.len();
    assert_eq!(&hit[n - 4], "causal");
    assert_eq!(&hit[n - 3], "lag fits, \"known\" link");
    assert_eq!(rows.iter().filter(|r| !r[n - 4].is_empty()).count(), 2);
    let html = std::fs::read_to_string(scan.join("report.html")).unwrap();
    assert!(
        html.contains("Reviewer&#39;s decision (A. Lee): <strong>causal</strong>")
            || html.contains("Reviewer's decision (A. Lee): <strong>causal</strong>")
    );

    let spec = concat!(env!("CARGO_MANIFEST_DIR"), "/training-sim/specs/small.toml");
    let model = dir.join("model");
    let out = Command::new(bin)
        .args(["train", "--quiet"])
        .arg(spec)
        .arg("--out")
        .arg(&model)
        .arg("--decisions")
        .arg(decisions)
        .arg("--decision-scans")
        .arg(dir.join("scan"))
        .args(FAST)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let card = std::fs::read_to_string(model.join("model-card.md")).unwrap();
    assert!(card.contains("## Reviewed pairs"), "{card}");
    assert!(
        card.contains("2 decisions: 1 causal, 1 non-causal, 0 unsure"),
        "{card}"
    );
    let reviewed = std::fs::read_to_string(model.join("reviewed-pairs.csv")).unwrap();
    assert_eq!(reviewed.lines().count(), 3, "{reviewed}");
}
