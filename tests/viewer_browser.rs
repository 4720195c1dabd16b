//! The record's viewer page in a real browser: Debian's `chromium`, driven headless over the W3C
//! WebDriver protocol by `chromedriver` (package `chromium-driver`), REFERENCES.md §15.
//!
//! The client is a few blocking HTTP calls (`ureq`, no async runtime: it compiles in seconds on a
//! small machine). The page is opened from `file://`, as a user opens it from the record folder.
//! Console errors are read from the browser log and every request the page made from the
//! DevTools network events (chromedriver's performance log), so a request outside the bag fails.
//!
//! These tests need `chromium` and `chromium-driver` installed (`apt-get install -y chromium
//! chromium-driver`; `.ci/run` does it) and fail, rather than skip, without them.

mod common;

use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use serde_json::{json, Value};

fn program(name: &str) -> PathBuf {
    let path = std::env::var_os("PATH").unwrap_or_default();
    std::env::split_paths(&path)
        .map(|d| d.join(name))
        .find(|p| p.is_file())
        .unwrap_or_else(|| {
            panic!("`{name}` is not installed; the viewer tests drive a real browser: run `apt-get install -y chromium chromium-driver` (as .ci/run does)")
        })
}

/// One chromedriver process and one browser session; both end when this is dropped.
struct Browser {
    driver: Child,
    base: String,
    session: String,
    _profile: tempfile::TempDir,
}

impl Browser {
    fn start() -> Browser {
        let chromium = program("chromium");
        let chromedriver = program("chromedriver");
        let port = TcpListener::bind("127.0.0.1:0")
            .unwrap()
            .local_addr()
            .unwrap()
            .port();
        let driver = Command::new(chromedriver)
            .arg(format!("--port={port}"))
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("chromedriver starts");
        let base = format!("http://127.0.0.1:{port}");
        let profile = tempfile::tempdir().unwrap();
        let mut browser = Browser {
            driver,
            base,
            session: String::new(),
            _profile: profile,
        };
        let deadline = Instant::now() + Duration::from_secs(30);
        loop {
            if let Ok(r) = ureq::get(&format!("{}/status", browser.base)).call() {
                let v: Value = r.into_json().unwrap();
                if v["value"]["ready"] == true {
                    break;
                }
            }
            assert!(
                Instant::now() < deadline,
                "chromedriver did not get ready in 30 s"
            );
            std::thread::sleep(Duration::from_millis(100));
        }
        // The machine may have no network: these flags stop chromium from reaching out (and
        // hanging on it); a fresh profile keeps every run alike.
        let args = vec![
            "--headless".to_string(),
            "--no-sandbox".into(),
            "--disable-gpu".into(),
            "--disable-quic".into(),
            "--no-first-run".into(),
            "--disable-background-networking".into(),
            "--disable-component-update".into(),
            "--disable-sync".into(),
            "--disable-dev-shm-usage".into(),
            "--window-size=1280,900".into(),
            format!("--user-data-dir={}", browser._profile.path().display()),
        ];
        let caps = json!({ "capabilities": { "alwaysMatch": {
            "browserName": "chrome",
            "goog:chromeOptions": { "binary": chromium, "args": args },
            "goog:loggingPrefs": { "browser": "ALL", "performance": "ALL" }
        }}});
        let v = browser.post("/session", caps);
        browser.session = v["sessionId"]
            .as_str()
            .unwrap_or_else(|| panic!("no session: {v}"))
            .to_string();
        browser
    }

    fn post(&self, path: &str, body: Value) -> Value {
        let url = if path == "/session" {
            format!("{}{path}", self.base)
        } else {
            format!("{}/session/{}{path}", self.base, self.session)
        };
        match ureq::post(&url)
            .timeout(Duration::from_secs(60))
            .send_json(body)
        {
            Ok(r) => r.into_json::<Value>().unwrap()["value"].clone(),
            Err(ureq::Error::Status(code, r)) => {
                panic!(
                    "WebDriver {path}: HTTP {code}: {}",
                    r.into_string().unwrap_or_default()
                )
            }
            Err(e) => panic!("WebDriver {path}: {e}"),
        }
    }

    fn open(&self, url: &str) {
        self.post("/url", json!({ "url": url }));
    }

    fn js(&self, script: &str) -> Value {
        self.post("/execute/sync", json!({ "script": script, "args": [] }))
    }

    fn text(&self, id: &str) -> String {
        self.js(&format!(
            "return document.getElementById('{id}').textContent;"
        ))
        .as_str()
        .unwrap()
        .to_string()
    }

    fn element(&self, css: &str) -> String {
        let v = self.post("/element", json!({ "using": "css selector", "value": css }));
        v.as_object()
            .and_then(|o| o.values().next())
            .and_then(Value::as_str)
            .unwrap_or_else(|| panic!("no element {css}: {v}"))
            .to_string()
    }

    fn click(&self, css: &str) {
        let e = self.element(css);
        self.post(&format!("/element/{e}/click"), json!({}));
    }

    /// Sends keys to the focused page through the element `css` (WebDriver key codes: U+E014 →).
    fn keys(&self, css: &str, text: &str) {
        let e = self.element(css);
        self.post(&format!("/element/{e}/value"), json!({ "text": text }));
    }

    fn log(&self, kind: &str) -> Vec<Value> {
        self.post("/se/log", json!({ "type": kind }))
            .as_array()
            .cloned()
            .unwrap_or_default()
    }

    fn wait_for(&self, what: &str, mut ok: impl FnMut(&Browser) -> bool) {
        let deadline = Instant::now() + Duration::from_secs(15);
        while !ok(self) {
            assert!(Instant::now() < deadline, "timed out waiting for {what}");
            std::thread::sleep(Duration::from_millis(50));
        }
    }
}

impl Drop for Browser {
    fn drop(&mut self) {
        if !self.session.is_empty() {
            let _ = ureq::delete(&format!("{}/session/{}", self.base, self.session))
                .timeout(Duration::from_secs(20))
                .call();
        }
        let _ = self.driver.kill();
        let _ = self.driver.wait();
    }
}

/// A record of the moving test dune with frames, GIF and video.
fn record(dir: &Path) -> PathBuf {
    let job = common::moving_dune_job(dir, "");
    let text = std::fs::read_to_string(&job)
        .unwrap()
        .replace(
            "view: { width: 128, height: 96 }",
            "view: { width: 320, height: 180, supersample: 1 }",
        )
        .replace(
            "output: { folder: out }",
            "output: { folder: out, gif: dune.gif, video: dune.mp4 }",
        );
    std::fs::write(&job, text).unwrap();
    let job = dunereel::job::load(&job).unwrap();
    dunereel::run_job(&job, &dunereel::RunOptions::default())
        .unwrap()
        .folder
}

/// (time, status, method) of every frame, read by column name.
fn index(bag: &Path) -> Vec<(String, String, String)> {
    let text = std::fs::read_to_string(bag.join("data/frames/index.csv")).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = |n: &str| header.iter().position(|h| *h == n).unwrap();
    let (t, s, m) = (at("time"), at("status"), at("method"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[t].to_string(), f[s].to_string(), f[m].to_string())
        })
        .collect()
}

fn file_url(p: &Path) -> String {
    format!("file://{}", p.canonicalize().unwrap().display())
}

fn severe_console_entries(b: &Browser) -> Vec<Value> {
    b.log("browser")
        .into_iter()
        .filter(|e| e["level"] == "SEVERE" || e["level"] == "WARNING")
        .collect()
}

/// URLs of every request the page made, from the DevTools network events.
fn requested_urls(b: &Browser) -> Vec<String> {
    b.log("performance")
        .iter()
        .filter_map(|e| serde_json::from_str::<Value>(e["message"].as_str()?).ok())
        .filter(|m| m["message"]["method"] == "Network.requestWillBeSent")
        .filter_map(|m| {
            m["message"]["params"]["request"]["url"]
                .as_str()
                .map(String::from)
        })
        .collect()
}

#[test]
fn viewer_steps_plays_and_stays_inside_the_bag() {
    let d = tempfile::tempdir().unwrap();
    let bag = record(d.path());
    let frames = index(&bag);
    let page = bag.join("data/viewer/index.html");
    let b = Browser::start();
    // Start from a blank tab and drop what the browser logged while starting (its own new-tab
    // page), so the logs below hold only what the viewer did.
    b.open("about:blank");
    b.log("performance");
    b.log("browser");
    b.open(&file_url(&page));
    b.wait_for("the first frame", |b| {
        b.text("frame-no").starts_with("1 of")
    });
    assert_eq!(b.text("frame-no"), format!("1 of {}", frames.len()));
    assert!(
        b.text("status").contains("MEASURED"),
        "{}",
        b.text("status")
    );
    assert_eq!(b.text("date"), "2030-03-01");
    assert!(b.text("caution").contains("not measurements"));

    // Jump to a survey by its date mark.
    let k = frames
        .iter()
        .position(|f| f.0.starts_with("2031-03-01"))
        .unwrap();
    b.click(&format!("#survey-buttons button[data-frame='{k}']"));
    assert_eq!(b.text("frame-no"), format!("{} of {}", k + 1, frames.len()));
    assert!(
        b.text("status").starts_with("MEASURED"),
        "{}",
        b.text("status")
    );
    assert_eq!(b.text("date"), "2031-03-01");
    // The survey's crest, read from the frame index by its column name, in the display unit.
    let crest = b.text("peak");
    assert!(
        crest.ends_with("above the reference)")
            && crest.chars().next().is_some_and(|c| c.is_ascii_digit()),
        "crest shown as {crest:?}"
    );

    // Move the slider to an interpolated date and read back frame and status.
    let (j, (time, status, method)) = frames
        .iter()
        .enumerate()
        .find(|(_, f)| f.1 == "interpolated" && f.0.as_str() > "2031-06")
        .unwrap();
    assert_eq!(status, "interpolated");
    b.js(&format!(
        "var s = document.getElementById('slider'); s.value = '{j}'; s.dispatchEvent(new Event('input', {{ bubbles: true }}));"
    ));
    assert_eq!(b.text("frame-no"), format!("{} of {}", j + 1, frames.len()));
    assert_eq!(b.text("date"), &time[..10]);
    assert!(
        b.text("status").contains("INTERPOLATED"),
        "{}",
        b.text("status")
    );
    let made = b.text("method");
    assert!(
        made.starts_with(method.as_str())
            && made.contains("2031-03-01")
            && made.contains("2033-03-01"),
        "{made}"
    );
    let src = b.js("return document.getElementById('frame').getAttribute('src');");
    assert_eq!(src, format!("../frames/frame-{j:04}.png"));

    // Keyboard: → steps one frame, space plays, and playing advances the frame.
    b.keys("#slider", "\u{E014}");
    assert_eq!(b.text("frame-no"), format!("{} of {}", j + 2, frames.len()));
    b.keys("#slider", "\u{E011}"); // Home
    assert_eq!(b.text("frame-no"), format!("1 of {}", frames.len()));
    b.click("#play");
    assert_eq!(b.text("play"), "Pause");
    b.wait_for("playing to advance past frame 2", |b| {
        let n: usize = b
            .text("frame-no")
            .split(' ')
            .next()
            .unwrap()
            .parse()
            .unwrap();
        n >= 3
    });
    b.keys("#slider", " ");
    assert_eq!(b.text("play"), "Play");

    // Tables with units, figures loaded.
    let heads = b.js("return Array.from(document.querySelectorAll('#pairs-table th')).map(t => t.textContent).join('|');");
    assert!(heads.as_str().unwrap().contains("(m³)"), "{heads}");
    b.js("window.scrollTo(0, document.body.scrollHeight);");
    b.wait_for("every image to load", |b| {
        b.js("return Array.from(document.images).every(i => i.complete && i.naturalWidth > 0);")
            == true
    });
    let links = b.js("return Array.from(document.querySelectorAll('#links a')).map(a => a.getAttribute('href'));");
    for l in links.as_array().unwrap() {
        let rel = l
            .as_str()
            .unwrap()
            .strip_prefix("../")
            .expect("links stay inside data/");
        assert!(bag.join("data").join(rel).is_file(), "broken link {rel}");
    }
    assert!(links.to_string().contains("dune.mp4") && links.to_string().contains("dune.gif"));

    // Nothing went wrong and nothing outside the bag was asked for.
    let errors = severe_console_entries(&b);
    assert!(errors.is_empty(), "console errors: {errors:?}");
    let root = file_url(&bag) + "/";
    let urls = requested_urls(&b);
    assert!(
        urls.len() > 3,
        "the performance log saw the page load: {urls:?}"
    );
    for u in &urls {
        // `data:` URLs carry their bytes in themselves (the browser's own video controls use
        // some); anything else must be a file of the bag.
        assert!(
            u.starts_with(&root) || u.starts_with("data:"),
            "request outside the bag: {u}"
        );
    }
    assert!(urls.iter().any(|u| u.ends_with("/data/viewer/index.html")));
    // The page's own view of it (W3C Resource Timing) agrees.
    let timing = b.js("return performance.getEntriesByType('resource').map(e => e.name);");
    for u in timing.as_array().unwrap() {
        assert!(
            u.as_str().unwrap().starts_with(&root),
            "resource outside the bag: {u}"
        );
    }
}

#[test]
fn viewer_fits_a_phone_screen() {
    let d = tempfile::tempdir().unwrap();
    let bag = record(d.path());
    let b = Browser::start();
    b.post("/window/rect", json!({ "width": 390, "height": 844 }));
    b.open(&file_url(&bag.join("data/viewer/index.html")));
    b.wait_for("the first frame", |b| {
        b.text("frame-no").starts_with("1 of")
    });
    let fits = b.js("return document.documentElement.scrollWidth <= window.innerWidth + 1;");
    let widths = b.js("return [document.documentElement.scrollWidth, window.innerWidth];");
    assert_eq!(fits, true, "page wider than the screen: {widths}");
    // The player stacks above the facts on a narrow screen.
    let stacked = b.js(
        "var s = document.getElementById('stage').getBoundingClientRect(); var f = document.getElementById('status').getBoundingClientRect(); return f.top >= s.bottom;",
    );
    assert_eq!(stacked, true);
    let errors = severe_console_entries(&b);
    assert!(errors.is_empty(), "console errors: {errors:?}");
}

#[test]
fn everything_the_viewer_shows_is_in_the_manifest_and_verified() {
    let d = tempfile::tempdir().unwrap();
    let bag = record(d.path());
    let page = bag.join("data/viewer/index.html");
    let html = std::fs::read_to_string(&page).unwrap();
    let data = dunereel::archive::viewer::embedded_data(&html).expect("the page embeds its data");
    let manifest = std::fs::read_to_string(bag.join("manifest-sha256.txt")).unwrap();
    let listed: Vec<&str> = manifest
        .lines()
        .filter_map(|l| l.split_once("  ").map(|p| p.1))
        .collect();
    assert!(listed.contains(&"data/viewer/index.html"));
    let files = data["files"].as_array().unwrap();
    assert!(files.iter().any(|f| f == "animation/dune.mp4"));
    assert!(files.iter().any(|f| f == "frames/frame-0000.png"));
    assert!(files
        .iter()
        .any(|f| f.as_str().unwrap().starts_with("maps/dod-")));
    for f in files {
        let f = format!("data/{}", f.as_str().unwrap());
        assert!(
            listed.contains(&f.as_str()),
            "{f} is shown by the viewer but not in the manifest"
        );
    }
    // Every relative src/href written in the page itself resolves inside data/.
    for attr in ["src=\"", "href=\""] {
        for part in html.split(attr).skip(1) {
            let target = &part[..part.find('"').unwrap()];
            assert!(
                !target.contains("://") && !target.starts_with("//"),
                "external reference {target}"
            );
        }
    }
    assert!(dunereel::archive::verify(&bag).unwrap().is_intact());
    // An altered page is caught by verify.
    std::fs::write(&page, html.replace("MEASURED", "MEASURED!")).unwrap();
    let report = dunereel::archive::verify(&bag).unwrap();
    assert_eq!(report.altered, vec!["data/viewer/index.html".to_string()]);
}

#[test]
fn a_record_without_png_frames_still_gets_a_viewer_without_frame_links() {
    let d = tempfile::tempdir().unwrap();
    let job = common::moving_dune_job(d.path(), "");
    let text = std::fs::read_to_string(&job).unwrap().replace(
        "output: { folder: out }",
        "output: { folder: out, png_frames: false }",
    );
    std::fs::write(&job, text).unwrap();
    let job = dunereel::job::load(&job).unwrap();
    let bag = dunereel::run_job(&job, &dunereel::RunOptions::default())
        .unwrap()
        .folder;
    let html = std::fs::read_to_string(bag.join("data/viewer/index.html")).unwrap();
    let data = dunereel::archive::viewer::embedded_data(&html).unwrap();
    assert!(data["frames"].is_null(), "{}", data["frames"]);
    let files = data["files"].as_array().unwrap();
    assert!(files
        .iter()
        .all(|f| !f.as_str().unwrap().starts_with("frames/")));
    assert!(files.iter().any(|f| f == "animation/animation.gif"));
    assert!(html.contains("made without PNG frames"));
    assert!(dunereel::archive::verify(&bag).unwrap().is_intact());
}
