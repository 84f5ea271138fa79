//! The examples of docs/deploy.md, checked with the tools that read them when those
//! tools are installed (each check says SKIPPED otherwise), and against the binary's
//! own options.

use std::path::{Path, PathBuf};
use std::process::Command;

/// The code blocks of docs/deploy.md whose info string names a file (`file=NAME`).
fn doc_file(name: &str) -> String {
    let doc = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/deploy.md"))
        .expect("docs/deploy.md");
    let marker = format!("file={name}");
    let mut lines = doc.lines();
    lines
        .by_ref()
        .find(|l| l.starts_with("```") && l.split_whitespace().any(|w| w == marker))
        .unwrap_or_else(|| panic!("docs/deploy.md has no block {marker}"));
    let body: Vec<&str> = lines.take_while(|l| !l.starts_with("```")).collect();
    body.join("\n") + "\n"
}

fn installed(tool: &str) -> Option<PathBuf> {
    std::env::var_os("PATH")?
        .to_str()?
        .split(':')
        .chain(["/usr/sbin", "/sbin"])
        .map(|d| Path::new(d).join(tool))
        .find(|p| p.is_file())
}

/// Every `LIFTLEDGER_…` variable an example sets must be one `liftledger serve` reads.
fn assert_known_variables(example: &str, text: &str) {
    let help = Command::new(env!("CARGO_BIN_EXE_liftledger"))
        .args(["serve", "--help"])
        .output()
        .expect("liftledger serve --help");
    let help = String::from_utf8_lossy(&help.stdout);
    let mut seen = 0;
    for word in text.split(|c: char| !(c.is_ascii_alphanumeric() || c == '_')) {
        if word.starts_with("LIFTLEDGER_") {
            seen += 1;
            assert!(
                help.contains(&format!("env: {word}")),
                "{example} sets {word}, which `liftledger serve` does not read"
            );
        }
    }
    assert!(
        seen > 0,
        "{example} configures liftledger through its environment"
    );
}

#[test]
fn the_systemd_unit_verifies() {
    let unit = doc_file("liftledger.service");
    assert_known_variables("the systemd unit", &unit);
    let Some(analyze) = installed("systemd-analyze") else {
        eprintln!("SKIPPED: systemd-analyze is not installed; the unit is unverified");
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    // verify checks that ExecStart names an executable: use the binary just built.
    let unit = unit.replace(
        "/usr/local/bin/liftledger",
        env!("CARGO_BIN_EXE_liftledger"),
    );
    let path = dir.path().join("liftledger.service");
    std::fs::write(&path, unit).unwrap();
    let out = Command::new(analyze)
        .arg("verify")
        .arg(&path)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    // verify answers 0 even for unknown keys and bad values (it ignores them): any
    // complaint about the file counts.
    let complaints: Vec<&str> = stderr
        .lines()
        .filter(|l| l.contains("liftledger.service"))
        .collect();
    assert!(
        out.status.success() && complaints.is_empty(),
        "systemd-analyze verify: {stderr}"
    );
}

#[test]
fn the_nginx_example_passes_nginx_t() {
    let site = doc_file("liftledger.nginx.conf");
    let Some(nginx) = installed("nginx") else {
        eprintln!("SKIPPED: nginx is not installed; the proxy example is unchecked");
        return;
    };
    let Some(openssl) = installed("openssl") else {
        eprintln!("SKIPPED: openssl is not installed (needed for a throw-away certificate)");
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let (cert, key) = (dir.path().join("cert.pem"), dir.path().join("key.pem"));
    let made = Command::new(openssl)
        .args([
            "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "1",
        ])
        .args(["-subj", "/CN=qc.example.org", "-keyout"])
        .arg(&key)
        .arg("-out")
        .arg(&cert)
        .output()
        .unwrap();
    assert!(
        made.status.success(),
        "{}",
        String::from_utf8_lossy(&made.stderr)
    );
    let site = site
        .replace("/etc/ssl/certs/qc.example.org.pem", cert.to_str().unwrap())
        .replace("/etc/ssl/private/qc.example.org.key", key.to_str().unwrap());
    let prefix = dir.path();
    // The site file as a distribution's nginx.conf includes it, inside `http`.
    let conf = format!(
        "pid {p}/nginx.pid;\nerror_log {p}/error.log;\nevents {{}}\nhttp {{\n\
         access_log off;\nclient_body_temp_path {p};\nproxy_temp_path {p};\n{site}}}\n",
        p = prefix.display()
    );
    let conf_path = prefix.join("nginx.conf");
    std::fs::write(&conf_path, conf).unwrap();
    let out = Command::new(nginx)
        .arg("-t")
        .arg("-p")
        .arg(prefix)
        .arg("-c")
        .arg(&conf_path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "nginx -t: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn the_container_file_is_marked_untested_and_names_known_variables() {
    let file = doc_file("Containerfile");
    assert_known_variables("the container file", &file);
    let doc = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/deploy.md"))
        .unwrap();
    assert!(
        doc.contains("**Untested here**"),
        "no test builds the container file, and the doc must say so"
    );
    eprintln!("SKIPPED: the container file is not built (no container engine here)");
}
