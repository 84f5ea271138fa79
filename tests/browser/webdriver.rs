//! A small W3C WebDriver client: starts chromedriver on a free port and drives
//! headless Chromium over the JSON wire protocol with reqwest.

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use base64::Engine;
use serde_json::{Value, json};

/// The key under which W3C WebDriver returns an element reference.
const ELEMENT_KEY: &str = "element-6066-11e4-a52e-4f735466cecf";

/// How long a wait lasts before the test gives up.
pub const WAIT: Duration = Duration::from_secs(15);

/// Where the browser and its driver live on this machine.
#[derive(Debug, Clone)]
pub struct Browsers {
    pub chromium: PathBuf,
    pub chromedriver: PathBuf,
}

fn on_path(names: &[&str]) -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    for dir in std::env::split_paths(&path) {
        for name in names {
            let candidate = dir.join(name);
            if candidate.is_file() {
                return Some(candidate);
            }
        }
    }
    None
}

/// Finds Chromium and chromedriver on PATH.
pub fn find_browsers() -> Option<Browsers> {
    Some(Browsers {
        chromium: on_path(&[
            "chromium",
            "chromium-browser",
            "google-chrome",
            "google-chrome-stable",
        ])?,
        chromedriver: on_path(&["chromedriver"])?,
    })
}

/// The browsers, or `None` after saying the test is skipped; panics instead when
/// `LIFTLEDGER_REQUIRE_BROWSER=1` (CI must not skip quietly).
pub fn browsers_or_skip() -> Option<Browsers> {
    match find_browsers() {
        Some(b) => Some(b),
        None if std::env::var("LIFTLEDGER_REQUIRE_BROWSER").is_ok_and(|v| v == "1") => {
            panic!("chromium/chromedriver not installed and LIFTLEDGER_REQUIRE_BROWSER=1")
        }
        None => {
            eprintln!("SKIPPED: chromium/chromedriver not installed");
            None
        }
    }
}

/// A chromedriver process this test started; killed (with its browsers) on drop.
pub struct Driver {
    child: Child,
    port: u16,
    http: reqwest::Client,
    chromium: PathBuf,
}

fn free_port() -> u16 {
    let l = std::net::TcpListener::bind("127.0.0.1:0").expect("bind a free port");
    l.local_addr().expect("local addr").port()
}

impl Driver {
    /// Starts chromedriver on a free port and waits until `/status` says ready.
    pub async fn start(b: &Browsers) -> Driver {
        let http = reqwest::Client::builder()
            .timeout(Duration::from_secs(60))
            .build()
            .expect("http client");
        let mut last_error = String::new();
        for _attempt in 0..3 {
            let port = free_port();
            let mut cmd = Command::new(&b.chromedriver);
            cmd.arg(format!("--port={port}"))
                .stdin(Stdio::null())
                .stdout(Stdio::null())
                .stderr(Stdio::null());
            {
                use std::os::unix::process::CommandExt;
                // Its own process group, so the browsers it starts go down with it.
                cmd.process_group(0);
            }
            let child = cmd.spawn().expect("spawn chromedriver");
            let mut driver = Driver {
                child,
                port,
                http: http.clone(),
                chromium: b.chromium.clone(),
            };
            let deadline = Instant::now() + Duration::from_secs(20);
            while Instant::now() < deadline {
                if let Ok(Some(status)) = driver.child.try_wait() {
                    last_error = format!("chromedriver exited early: {status}");
                    break;
                }
                let ready = async {
                    let r = driver
                        .http
                        .get(format!("{}/status", driver.base()))
                        .send()
                        .await
                        .ok()?;
                    let v: Value = r.json().await.ok()?;
                    v["value"]["ready"].as_bool()
                };
                if ready.await == Some(true) {
                    return driver;
                }
                tokio::time::sleep(Duration::from_millis(100)).await;
            }
            if last_error.is_empty() {
                last_error = format!("chromedriver on port {port} never said ready");
            }
            drop(driver);
        }
        panic!("{last_error}");
    }

    fn base(&self) -> String {
        format!("http://127.0.0.1:{}", self.port)
    }

    /// A new headless browser session at phone size (360 × 800).
    pub async fn session(&self, javascript: bool) -> Session {
        let profile = tempfile::tempdir().expect("profile dir");
        let mut options = json!({
            "binary": self.chromium,
            "args": [
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                "--disable-dev-shm-usage",
                "--window-size=360,800",
                format!("--user-data-dir={}", profile.path().display()),
            ],
        });
        if !javascript {
            options["prefs"] = json!({"profile.managed_default_content_settings.javascript": 2});
        }
        let body = json!({"capabilities": {"alwaysMatch": {
            "browserName": "chrome",
            "pageLoadStrategy": "normal",
            "goog:chromeOptions": options,
        }}});
        let r = self
            .http
            .post(format!("{}/session", self.base()))
            .json(&body)
            .send()
            .await
            .expect("POST /session");
        let v: Value = r.json().await.expect("session JSON");
        let id = v["value"]["sessionId"]
            .as_str()
            .unwrap_or_else(|| panic!("no session: {v}"))
            .to_string();
        let session = Session {
            http: self.http.clone(),
            port: self.port,
            id,
            closed: false,
            _profile: profile,
        };
        // Headless windows are never narrower than 500 px, so the phone's screen is set
        // directly (as a mobile viewport that honours the page's viewport meta tag).
        // Chrome's touch emulation is left off: with scripts disabled its taps hang.
        session
            .must(
                reqwest::Method::POST,
                "/goog/cdp/execute",
                Some(json!({"cmd": "Emulation.setDeviceMetricsOverride",
                            "params": {"width": 360, "height": 800, "deviceScaleFactor": 2, "mobile": true}})),
            )
            .await;
        session
    }
}

impl Drop for Driver {
    fn drop(&mut self) {
        let pid = self.child.id();
        // The group holds chromedriver and any browser it left behind.
        let _ = Command::new("kill")
            .args(["-KILL", "--"])
            .arg(format!("-{pid}"))
            .stderr(Stdio::null())
            .status();
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// A WebDriver error as the driver reported it.
#[derive(Debug)]
pub struct WdError {
    pub error: String,
    pub message: String,
}

impl std::fmt::Display for WdError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}: {}", self.error, self.message)
    }
}

/// One browser session; deleted on drop (with a screenshot first if the test panicked).
pub struct Session {
    http: reqwest::Client,
    port: u16,
    id: String,
    closed: bool,
    _profile: tempfile::TempDir,
}

/// An element found on the current page.
pub struct Element<'a> {
    s: &'a Session,
    id: String,
}

fn element_id(v: &Value) -> Option<String> {
    v[ELEMENT_KEY].as_str().map(str::to_string)
}

impl Session {
    fn url_of(&self, path: &str) -> String {
        format!("http://127.0.0.1:{}/session/{}{}", self.port, self.id, path)
    }

    /// Sends one command and returns its `value`, or the driver's error.
    pub async fn cmd(
        &self,
        method: reqwest::Method,
        path: &str,
        body: Option<Value>,
    ) -> Result<Value, WdError> {
        let mut req = self.http.request(method.clone(), self.url_of(path));
        if let Some(b) = body {
            req = req.json(&b);
        } else if method == reqwest::Method::POST {
            req = req.json(&json!({}));
        }
        let r = req.send().await.map_err(|e| WdError {
            error: "transport".into(),
            message: e.to_string(),
        })?;
        let ok = r.status().is_success();
        let v: Value = r.json().await.map_err(|e| WdError {
            error: "bad response".into(),
            message: e.to_string(),
        })?;
        let value = v.get("value").cloned().unwrap_or(Value::Null);
        if ok {
            Ok(value)
        } else {
            Err(WdError {
                error: value["error"].as_str().unwrap_or("unknown").to_string(),
                message: value["message"]
                    .as_str()
                    .unwrap_or("")
                    .lines()
                    .next()
                    .unwrap_or("")
                    .to_string(),
            })
        }
    }

    async fn must(&self, method: reqwest::Method, path: &str, body: Option<Value>) -> Value {
        match self.cmd(method, path, body).await {
            Ok(v) => v,
            Err(e) => panic!("webdriver {path}: {e} (page {})", self.current_url().await),
        }
    }

    /// Opens a URL and waits for the page to load.
    pub async fn goto(&self, url: &str) {
        self.must(reqwest::Method::POST, "/url", Some(json!({"url": url})))
            .await;
    }

    /// The browser's history back button.
    pub async fn back(&self) {
        self.must(reqwest::Method::POST, "/back", None).await;
    }

    /// The address bar.
    pub async fn current_url(&self) -> String {
        match self.cmd(reqwest::Method::GET, "/url", None).await {
            Ok(v) => v.as_str().unwrap_or("").to_string(),
            Err(e) => format!("<unknown: {e}>"),
        }
    }

    /// The path and fragment of the current URL ("/lots/3#test-FT-0012").
    pub async fn current_path(&self) -> String {
        let url = self.current_url().await;
        match url.split_once("://") {
            Some((_, rest)) => rest
                .find('/')
                .map_or("/".to_string(), |i| rest[i..].to_string()),
            None => url,
        }
    }

    /// The first element matching a CSS selector, if any.
    pub async fn try_find(&self, css: &str) -> Option<Element<'_>> {
        let v = self
            .cmd(
                reqwest::Method::POST,
                "/element",
                Some(json!({"using": "css selector", "value": css})),
            )
            .await
            .ok()?;
        element_id(&v).map(|id| Element { s: self, id })
    }

    /// The first element matching a CSS selector; panics when there is none.
    pub async fn find(&self, css: &str) -> Element<'_> {
        match self.try_find(css).await {
            Some(e) => e,
            None => panic!("no element {css} on {}", self.current_url().await),
        }
    }

    /// Every element matching a CSS selector.
    pub async fn find_all(&self, css: &str) -> Vec<Element<'_>> {
        let v = self
            .must(
                reqwest::Method::POST,
                "/elements",
                Some(json!({"using": "css selector", "value": css})),
            )
            .await;
        v.as_array()
            .into_iter()
            .flatten()
            .filter_map(element_id)
            .map(|id| Element { s: self, id })
            .collect()
    }

    /// Waits until an element matching `css` is on the page.
    pub async fn wait_for(&self, css: &str) -> Element<'_> {
        let deadline = Instant::now() + WAIT;
        loop {
            if let Some(e) = self.try_find(css).await {
                return e;
            }
            if Instant::now() > deadline {
                panic!("waited {WAIT:?} for {css} on {}", self.current_url().await);
            }
            tokio::time::sleep(Duration::from_millis(100)).await;
        }
    }

    /// Polls `check` until it returns `Some`; panics with `what` after the timeout.
    pub async fn wait_until<T>(&self, what: &str, mut check: impl AsyncFnMut() -> Option<T>) -> T {
        let deadline = Instant::now() + WAIT;
        loop {
            if let Some(v) = check().await {
                return v;
            }
            if Instant::now() > deadline {
                panic!("waited {WAIT:?} for {what} on {}", self.current_url().await);
            }
            tokio::time::sleep(Duration::from_millis(100)).await;
        }
    }

    /// Runs JavaScript in the page and returns its result.
    pub async fn script(&self, js: &str, args: Vec<Value>) -> Value {
        self.must(
            reqwest::Method::POST,
            "/execute/sync",
            Some(json!({"script": js, "args": args})),
        )
        .await
    }

    /// Runs a Chrome DevTools Protocol command on the page (network emulation and the like).
    pub async fn cdp(&self, cmd: &str, params: Value) -> Value {
        self.must(
            reqwest::Method::POST,
            "/goog/cdp/execute",
            Some(json!({"cmd": cmd, "params": params})),
        )
        .await
    }

    /// The visible part of the page as PNG bytes.
    pub async fn screenshot(&self) -> Vec<u8> {
        let v = self.must(reqwest::Method::GET, "/screenshot", None).await;
        base64::engine::general_purpose::STANDARD
            .decode(v.as_str().unwrap_or(""))
            .expect("screenshot base64")
    }

    /// The whole page, top to bottom, at the window's width (falls back to the viewport).
    pub async fn full_page_screenshot(&self) -> Vec<u8> {
        let cdp = |cmd: &str, params: Value| json!({"cmd": cmd, "params": params});
        let metrics = self
            .cmd(
                reqwest::Method::POST,
                "/goog/cdp/execute",
                Some(cdp("Page.getLayoutMetrics", json!({}))),
            )
            .await;
        let Ok(metrics) = metrics else {
            return self.screenshot().await;
        };
        let width = metrics["cssContentSize"]["width"].as_f64().unwrap_or(360.0);
        let height = metrics["cssContentSize"]["height"]
            .as_f64()
            .unwrap_or(800.0);
        let shot = self
            .cmd(
                reqwest::Method::POST,
                "/goog/cdp/execute",
                Some(cdp(
                    "Page.captureScreenshot",
                    json!({"format": "png", "captureBeyondViewport": true,
                           "clip": {"x": 0, "y": 0, "width": width, "height": height, "scale": 1}}),
                )),
            )
            .await;
        match shot {
            Ok(v) => base64::engine::general_purpose::STANDARD
                .decode(v["data"].as_str().unwrap_or(""))
                .expect("screenshot base64"),
            Err(_) => self.screenshot().await,
        }
    }

    /// Saves the viewport (`name.png`) and the whole page (`name-full.png`) under `dir`.
    pub async fn save_screenshots(&self, dir: &Path, name: &str) {
        std::fs::create_dir_all(dir).expect("screenshot dir");
        std::fs::write(dir.join(format!("{name}.png")), self.screenshot().await)
            .expect("write screenshot");
        std::fs::write(
            dir.join(format!("{name}-full.png")),
            self.full_page_screenshot().await,
        )
        .expect("write screenshot");
    }

    /// Ends the session and closes the browser.
    pub async fn quit(mut self) {
        self.closed = true;
        let _ = self.cmd(reqwest::Method::DELETE, "", None).await;
    }

    /// A plain blocking HTTP exchange with chromedriver, for use in `Drop`.
    fn blocking(&self, method: &str, path: &str) -> Option<Value> {
        let mut stream = TcpStream::connect(("127.0.0.1", self.port)).ok()?;
        stream
            .set_read_timeout(Some(Duration::from_secs(20)))
            .ok()?;
        let target = format!("/session/{}{}", self.id, path);
        let req = format!(
            "{method} {target} HTTP/1.1\r\nHost: 127.0.0.1:{}\r\nContent-Length: 0\r\nConnection: close\r\n\r\n",
            self.port
        );
        stream.write_all(req.as_bytes()).ok()?;
        let mut raw = Vec::new();
        let mut buf = [0u8; 64 * 1024];
        loop {
            let n = stream.read(&mut buf).ok()?;
            if n == 0 {
                break;
            }
            raw.extend_from_slice(&buf[..n]);
            // Stop at the end of the body even if the driver keeps the connection open.
            if let Some(head_end) = raw.windows(4).position(|w| w == b"\r\n\r\n") {
                let head = String::from_utf8_lossy(&raw[..head_end]).to_ascii_lowercase();
                let length = head
                    .lines()
                    .find_map(|l| l.strip_prefix("content-length:"))
                    .and_then(|v| v.trim().parse::<usize>().ok());
                if length.is_some_and(|len| raw.len() >= head_end + 4 + len) {
                    break;
                }
            }
        }
        let head_end = raw.windows(4).position(|w| w == b"\r\n\r\n")?;
        serde_json::from_slice(&raw[head_end + 4..]).ok()
    }
}

impl Drop for Session {
    fn drop(&mut self) {
        if self.closed {
            return;
        }
        if std::thread::panicking()
            && let Some(v) = self.blocking("GET", "/screenshot")
            && let Ok(png) =
                base64::engine::general_purpose::STANDARD.decode(v["value"].as_str().unwrap_or(""))
        {
            let dir = crate::app::shots_dir();
            let name = std::thread::current()
                .name()
                .unwrap_or("test")
                .replace("::", "-");
            if std::fs::create_dir_all(&dir).is_ok() {
                let path = dir.join(format!("FAILED-{name}.png"));
                if std::fs::write(&path, png).is_ok() {
                    eprintln!("screenshot of the failure: {}", path.display());
                }
            }
        }
        let _ = self.blocking("DELETE", "");
    }
}

impl<'a> Element<'a> {
    fn path(&self, tail: &str) -> String {
        format!("/element/{}{}", self.id, tail)
    }

    /// Clicks it (the driver scrolls it into view first).
    pub async fn click(&self) {
        self.s
            .must(reqwest::Method::POST, &self.path("/click"), None)
            .await;
    }

    /// Empties an input.
    pub async fn clear(&self) {
        self.s
            .must(reqwest::Method::POST, &self.path("/clear"), None)
            .await;
    }

    /// Types into it, key by key.
    pub async fn send_keys(&self, text: &str) {
        self.s
            .must(
                reqwest::Method::POST,
                &self.path("/value"),
                Some(json!({"text": text})),
            )
            .await;
    }

    /// Replaces an input's value by typing.
    pub async fn type_over(&self, text: &str) {
        self.clear().await;
        self.send_keys(text).await;
    }

    /// The text a user sees in it.
    pub async fn text(&self) -> String {
        let v = self
            .s
            .must(reqwest::Method::GET, &self.path("/text"), None)
            .await;
        v.as_str().unwrap_or("").to_string()
    }

    /// An attribute as written in the HTML (`None` when absent).
    pub async fn attr(&self, name: &str) -> Option<String> {
        let v = self
            .s
            .must(
                reqwest::Method::GET,
                &self.path(&format!("/attribute/{name}")),
                None,
            )
            .await;
        v.as_str().map(str::to_string)
    }

    /// A DOM property (an input's current `value`, say).
    pub async fn prop(&self, name: &str) -> Value {
        self.s
            .must(
                reqwest::Method::GET,
                &self.path(&format!("/property/{name}")),
                None,
            )
            .await
    }

    /// The first descendant matching a CSS selector, if any.
    pub async fn try_find(&self, css: &str) -> Option<Element<'a>> {
        let v = self
            .s
            .cmd(
                reqwest::Method::POST,
                &self.path("/element"),
                Some(json!({"using": "css selector", "value": css})),
            )
            .await
            .ok()?;
        element_id(&v).map(|id| Element { s: self.s, id })
    }

    /// The first descendant matching a CSS selector; panics when there is none.
    pub async fn find(&self, css: &str) -> Element<'a> {
        match self.try_find(css).await {
            Some(e) => e,
            None => panic!(
                "no {css} inside the element on {}",
                self.s.current_url().await
            ),
        }
    }
}
