//! The fleet report in a real headless browser (Debian `chromium` driven by
//! `chromedriver` over the W3C WebDriver protocol on a loopback port; `scripts/browser-test.sh`
//! installs both and sets `HOLDBACK_CHROMIUM` and `HOLDBACK_CHROMEDRIVER`): the page loads
//! without JS errors, the overview lists every pond, a storm's plot is present, and clicking a
//! header sorts the table (both ways).

use std::collections::BTreeMap;
use std::io::{Read, Write};
use std::net::TcpStream;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use holdback_review::demo::{self, MemorySink};
use holdback_review::report::{self, FleetData, ReportOptions};
use holdback_review::storm::{self, SummaryOptions};
use serde_json::{Value, json};

/// A minimal HTTP/1.1 client for WebDriver's JSON commands (loopback only).
fn http(port: u16, method: &str, path: &str, body: Option<&Value>) -> Result<Value, String> {
    let mut s = TcpStream::connect(("127.0.0.1", port)).map_err(|e| e.to_string())?;
    s.set_read_timeout(Some(Duration::from_secs(60)))
        .map_err(|e| e.to_string())?;
    let b = body.map(|v| v.to_string()).unwrap_or_default();
    let req = format!(
        "{method} {path} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nContent-Type: application/json\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{b}",
        b.len()
    );
    s.write_all(req.as_bytes()).map_err(|e| e.to_string())?;
    // Read the header, then exactly Content-Length bytes (the driver may keep the
    // connection open), or chunks up to the last one.
    let mut raw = Vec::new();
    let mut buf = [0u8; 8192];
    let head_end = loop {
        let n = s.read(&mut buf).map_err(|e| e.to_string())?;
        if n == 0 {
            return Err("connection closed before the header ended".into());
        }
        raw.extend_from_slice(&buf[..n]);
        if let Some(p) = raw.windows(4).position(|w| w == b"\r\n\r\n") {
            break p + 4;
        }
    };
    let head = String::from_utf8_lossy(&raw[..head_end]).to_ascii_lowercase();
    let length = head
        .lines()
        .find_map(|l| {
            l.strip_prefix("content-length:")
                .map(|v| v.trim().parse::<usize>())
        })
        .transpose()
        .map_err(|e| e.to_string())?;
    let chunked = head.contains("transfer-encoding: chunked");
    loop {
        let have = raw.len() - head_end;
        let done = match length {
            Some(len) => have >= len,
            None if chunked => raw.ends_with(b"0\r\n\r\n"),
            None => false,
        };
        if done {
            break;
        }
        let n = s.read(&mut buf).map_err(|e| e.to_string())?;
        if n == 0 {
            break;
        }
        raw.extend_from_slice(&buf[..n]);
    }
    let rest = String::from_utf8_lossy(&raw[head_end..]).into_owned();
    let body = if chunked {
        let mut out = String::new();
        let mut r = rest.as_str();
        while let Some((len, tail)) = r.split_once("\r\n") {
            let n = usize::from_str_radix(len.trim(), 16).map_err(|e| e.to_string())?;
            if n == 0 {
                break;
            }
            out.push_str(&tail[..n]);
            r = &tail[n + 2..];
        }
        out
    } else {
        rest
    };
    let v: Value = serde_json::from_str(&body).map_err(|e| format!("{e}: {body}"))?;
    if let Some(err) = v["value"].get("error") {
        return Err(format!("{method} {path}: {err}: {}", v["value"]["message"]));
    }
    Ok(v)
}

struct Driver {
    child: Child,
    port: u16,
    session: String,
}

impl Drop for Driver {
    fn drop(&mut self) {
        let _ = http(
            self.port,
            "DELETE",
            &format!("/session/{}", self.session),
            None,
        );
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

impl Driver {
    fn cmd(&self, method: &str, what: &str, body: Value) -> Value {
        let path = format!("/session/{}/{what}", self.session);
        let b = if method == "GET" { None } else { Some(&body) };
        http(self.port, method, &path, b).unwrap()["value"].clone()
    }
    fn js(&self, script: &str) -> Value {
        self.cmd(
            "POST",
            "execute/sync",
            json!({"script": script, "args": []}),
        )
    }
    fn click(&self, css: &str) {
        let el = self.cmd(
            "POST",
            "element",
            json!({"using": "css selector", "value": css}),
        );
        let id = el
            .as_object()
            .and_then(|o| o.values().next())
            .and_then(Value::as_str)
            .unwrap()
            .to_string();
        self.cmd("POST", &format!("element/{id}/click"), json!({}));
    }
}

fn start(chromium: &str, driver: &str, profile: &std::path::Path) -> Driver {
    let port = 9515 + (std::process::id() % 500) as u16;
    let child = Command::new(driver)
        .arg(format!("--port={port}"))
        .arg("--allowed-ips=127.0.0.1")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("chromedriver starts");
    let t0 = Instant::now();
    while http(port, "GET", "/status", None).map(|v| v["value"]["ready"] == json!(true)) != Ok(true)
    {
        assert!(
            t0.elapsed() < Duration::from_secs(30),
            "chromedriver not ready on port {port}"
        );
        std::thread::sleep(Duration::from_millis(100));
    }
    let caps = json!({"capabilities": {"alwaysMatch": {
        "browserName": "chrome",
        "goog:loggingPrefs": {"browser": "ALL"},
        "goog:chromeOptions": {"binary": chromium, "args": [
            "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
            "--disable-component-update", "--disable-sync", "--no-first-run",
            format!("--user-data-dir={}", profile.display())
        ]}
    }}});
    let mut d = Driver {
        child,
        port,
        session: String::new(),
    };
    let v = http(port, "POST", "/session", Some(&caps)).unwrap();
    d.session = v["value"]["sessionId"].as_str().unwrap().to_string();
    d
}

/// A report of 4 demo ponds over 60 days (summaries made straight from the generated logs).
fn write_report(dir: &std::path::Path) -> (std::path::PathBuf, Vec<String>) {
    let fleet = demo::fleet(4, 5).unwrap();
    let start = holdback_review::time::start_of_year_s(2025);
    let (mut ponds, mut storms, mut health) = (Vec::new(), Vec::new(), Vec::new());
    for p in &fleet {
        let mut sink = MemorySink::new(15);
        demo::simulate(p, start, 60, &mut sink, |_, _| Ok(())).unwrap();
        let s = storm::summarise(&p.pond, &sink.records, None, &SummaryOptions::default());
        health.push(storm::pond_health(&p.pond, &sink.records, &s));
        storms.extend(s);
        ponds.push(p.pond.clone());
    }
    let problems = BTreeMap::new();
    let d = FleetData {
        ponds: &ponds,
        storms: &storms,
        health: &health,
        problems: &problems,
    };
    let html = report::html(&d, &ReportOptions::default());
    let path = dir.join("fleet.html");
    std::fs::write(&path, html).unwrap();
    (path, ponds.iter().map(|p| p.info.pond_id.clone()).collect())
}

#[test]
#[ignore = "needs chromium + chromedriver: scripts/browser-test.sh"]
fn report_loads_lists_every_pond_plots_and_sorts_on_click() {
    let chromium = std::env::var("HOLDBACK_CHROMIUM").expect("HOLDBACK_CHROMIUM: path of chromium");
    let driver = std::env::var("HOLDBACK_CHROMEDRIVER")
        .expect("HOLDBACK_CHROMEDRIVER: path of chromedriver");
    let dir = tempfile::tempdir().unwrap();
    let (page, ids) = write_report(dir.path());
    let d = start(&chromium, &driver, &dir.path().join("profile"));
    d.cmd(
        "POST",
        "url",
        json!({"url": format!("file://{}", page.display())}),
    );
    // No JS error: the inline script ran to its end, and the browser log has no SEVERE entry.
    assert_eq!(
        d.js("return document.body.getAttribute('data-ready');"),
        json!("1")
    );
    let logs = http(
        d.port,
        "POST",
        &format!("/session/{}/se/log", d.session),
        Some(&json!({"type": "browser"})),
    )
    .map(|v| v["value"].clone())
    .unwrap_or(json!([]));
    let severe: Vec<&Value> = logs
        .as_array()
        .map(|a| a.iter().filter(|e| e["level"] == json!("SEVERE")).collect())
        .unwrap_or_default();
    assert!(severe.is_empty(), "browser errors: {severe:?}");
    // No external asset of any kind.
    assert_eq!(
        d.js("return document.querySelectorAll('link[href],script[src],img[src]').length;"),
        json!(0)
    );
    // Every pond in the overview.
    let listed = d.js("return Array.from(document.querySelectorAll('#overview tbody tr')).map(r => r.cells[0].textContent);");
    let listed: Vec<String> = serde_json::from_value(listed).unwrap();
    assert_eq!(listed, ids);
    // A storm plot with a stage line.
    let plots = d.js("return Array.from(document.querySelectorAll('svg.plot path.stage')).filter(p => p.getAttribute('d').length > 20).length;");
    assert!(plots.as_u64().unwrap() > 0, "no storm plot");
    // Clicking the 'storms' header sorts ascending, a second click descending.
    let col = "return Array.from(document.querySelectorAll('#overview tbody tr')).map(r => parseFloat(r.cells[2].getAttribute('data-v')));";
    d.click("#overview thead th:nth-child(3)");
    let up: Vec<f64> = serde_json::from_value(d.js(col)).unwrap();
    assert!(up.windows(2).all(|w| w[0] <= w[1]), "{up:?}");
    d.click("#overview thead th:nth-child(3)");
    let down: Vec<f64> = serde_json::from_value(d.js(col)).unwrap();
    assert!(down.windows(2).all(|w| w[0] >= w[1]), "{down:?}");
    let mut a = up.clone();
    a.reverse();
    assert_eq!(a, down);
    // Text sort on the name column too.
    d.click("#overview thead th:nth-child(2)");
    let names: Vec<String> = serde_json::from_value(d.js("return Array.from(document.querySelectorAll('#overview tbody tr')).map(r => r.cells[1].textContent);")).unwrap();
    let mut sorted = names.clone();
    sorted.sort_by_key(|s| s.to_lowercase());
    assert_eq!(names.len(), ids.len());
    assert_eq!(
        names.iter().map(|s| s.to_lowercase()).collect::<Vec<_>>(),
        sorted.iter().map(|s| s.to_lowercase()).collect::<Vec<_>>()
    );
}
