//! `headroom budget --plot` as a user runs it: the files it writes and the
//! errors it gives.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_headroom"))
}

fn example(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../examples/links")
        .join(name)
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().expect("runs")
}

fn s(p: &Path) -> &str {
    p.to_str().expect("utf-8 path")
}

/// Every text node of an SVG that must parse as XML.
fn svg_texts(path: &Path) -> String {
    let text = std::fs::read_to_string(path).expect("svg written");
    let doc = roxmltree::Document::parse(&text).expect("well-formed XML");
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    doc.descendants()
        .filter_map(|n| n.text())
        .collect::<Vec<_>>()
        .join("\n")
}

/// Width and height from a PNG's IHDR chunk, after checking the signature.
fn png_size(path: &Path) -> (u32, u32) {
    let b = std::fs::read(path).expect("png written");
    assert_eq!(b.get(..8), Some(&b"\x89PNG\r\n\x1a\n"[..]), "PNG signature");
    assert_eq!(b.get(12..16), Some(&b"IHDR"[..]), "IHDR first");
    let be = |r: std::ops::Range<usize>| {
        u32::from_be_bytes(b.get(r).and_then(|x| x.try_into().ok()).expect("4 bytes"))
    };
    (be(16..20), be(20..24))
}

/// A number as the plot labels it: one decimal, U+2212 for minus.
fn label(x: f64) -> String {
    let t = format!("{x:.1}");
    match t.strip_prefix('-') {
        Some(r) => format!("\u{2212}{r}"),
        None => t,
    }
}

fn budget_json(link: &Path) -> serde_json::Value {
    let out = run(&["budget", s(link), "--format", "json"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("JSON")
}

fn only_files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .expect("list")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn svg_level_diagram_carries_the_budget() {
    let dir = tempfile::tempdir().expect("temp dir");
    for f in [
        "orchard-sensor.toml",
        "smallsat-ground-station.toml",
        "workshop-mesh.toml",
    ] {
        let link = example(f);
        let plot = dir.path().join(f.replace(".toml", ".svg"));
        let out = run(&["budget", s(&link), "--plot", s(&plot)]);
        assert!(
            out.status.success(),
            "{f}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(!out.stdout.is_empty(), "the report is still printed");
        let texts = svg_texts(&plot);
        let v = budget_json(&link);
        let name = v["link"].as_str().expect("name");
        for needle in [
            "power (dBm)",
            "stage along the chain",
            "noise floor",
            "EIRP",
            "path loss",
            "margin",
            name,
        ] {
            assert!(texts.contains(needle), "{f}: no '{needle}' in the SVG");
        }
        for item in v["line_items"].as_array().expect("items") {
            let n = item["name"].as_str().expect("item name");
            // Long names are wrapped at spaces: look for the first word.
            let first = n.split_whitespace().next().expect("a word");
            assert!(texts.contains(first), "{f}: no item '{n}'");
        }
        // The levels and the margin are the engine's numbers.
        for key in ["tx_power_dbm", "eirp_dbm", "rx_power_dbm"] {
            let want = format!("{} dBm", label(v[key].as_f64().expect("number")));
            assert!(texts.contains(&want), "{f}: no '{want}' ({key})");
        }
        for key in ["noise_power_dbm", "sensitivity_dbm"] {
            assert!(
                texts.contains(&label(v[key].as_f64().expect("number"))),
                "{f}: {key}"
            );
        }
        let margin = v["margin_db"].as_f64().expect("number");
        let want = format!("{} dB", label(margin.abs()));
        assert!(texts.contains(&want), "{f}: no margin '{want}'");
    }
    assert_eq!(only_files(dir.path()).len(), 3, "no temporary files left");
}

#[test]
fn png_level_diagram_has_its_size() {
    let dir = tempfile::tempdir().expect("temp dir");
    let plot = dir.path().join("orchard.PNG");
    let out = run(&[
        "budget",
        s(&example("orchard-sensor.toml")),
        "--plot",
        s(&plot),
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert_eq!(png_size(&plot), (1100, 680));
}

fn fails_with(args: &[&str], code: i32, needle: &str) {
    let out = run(args);
    assert_eq!(out.status.code(), Some(code), "{args:?}");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains(needle), "{args:?}: {err}");
    assert_eq!(err.trim().lines().count(), 1, "one line: {err}");
    assert!(!err.contains("panicked"));
    assert!(out.stdout.is_empty(), "nothing printed on failure");
}

#[test]
fn a_bad_extension_is_refused_before_any_work() {
    let dir = tempfile::tempdir().expect("temp dir");
    let link = example("orchard-sensor.toml");
    let jpg = dir.path().join("plot.jpg");
    fails_with(
        &["budget", s(&link), "--plot", s(&jpg)],
        2,
        "unknown plot type '.jpg' (use .svg or .png)",
    );
    let bare = dir.path().join("plot");
    fails_with(
        &["budget", s(&link), "--plot", s(&bare)],
        2,
        "no file extension",
    );
    assert!(only_files(dir.path()).is_empty(), "nothing written");
}

#[test]
fn an_existing_file_is_kept_unless_forced() {
    let dir = tempfile::tempdir().expect("temp dir");
    let link = example("orchard-sensor.toml");
    let plot = dir.path().join("level.svg");
    std::fs::write(&plot, "keep me").expect("write");
    fails_with(
        &["budget", s(&link), "--plot", s(&plot)],
        2,
        "already exists (use --force to overwrite)",
    );
    assert_eq!(std::fs::read_to_string(&plot).expect("read"), "keep me");
    let out = run(&["budget", s(&link), "--plot", s(&plot), "--force"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(svg_texts(&plot).contains("power (dBm)"));
    assert_eq!(only_files(dir.path()), vec!["level.svg".to_string()]);
}

#[test]
fn an_unwritable_destination_is_an_io_error() {
    let dir = tempfile::tempdir().expect("temp dir");
    let plot = dir.path().join("no-such-dir").join("level.svg");
    fails_with(
        &[
            "budget",
            s(&example("orchard-sensor.toml")),
            "--plot",
            s(&plot),
        ],
        1,
        "temporary file",
    );
}

/// No control or bidi character outside the newlines that end lines.
fn assert_no_raw_controls(what: &str, text: &str) {
    let bad: Vec<char> = text
        .chars()
        .filter(|&c| {
            c != '\n'
                && (c.is_control()
                    || matches!(c, '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}'))
        })
        .collect();
    assert!(bad.is_empty(), "{what}: {bad:?}");
}

#[test]
fn control_characters_in_names_give_well_formed_svg_and_clean_tables() {
    let dir = tempfile::tempdir().expect("temp dir");
    let link = std::fs::read_to_string(example("orchard-sensor.toml")).expect("example");
    let from = "name = \"canopy (summer foliage)\"";
    assert!(link.contains(from), "update the test");
    // ESC, CR, LF, NUL, DEL, a C1 CSI, a bidi override, and XML's < & in a
    // line-item name (TOML escapes) and in the link's name.
    let hostile = "c\\u001b[2J\\r\\nfake row\\u0000\\u007f\\u009b\\u202e<&";
    let link = link
        .replacen(from, &format!("name = \"{hostile}\""), 1)
        .replacen(
            "name = \"Kestrel Hill orchard",
            "name = \"\\u001b]0;title\\u0007 <&> Kestrel Hill orchard",
            1,
        );
    let l = dir.path().join("hostile.toml");
    std::fs::write(&l, link).expect("write link");
    let svg = dir.path().join("hostile.svg");
    let png = dir.path().join("hostile.png");
    for (format, plot) in [("table", &svg), ("json", &png)] {
        let o = run(&["budget", s(&l), "--format", format, "--plot", s(plot)]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let out = String::from_utf8(o.stdout).expect("utf-8");
        assert_no_raw_controls(format, &out);
        assert!(out.contains("fake row"), "{out}");
        assert!(!out.lines().any(|l| l.starts_with("fake row")), "{out}");
        if format == "json" {
            let v: serde_json::Value = serde_json::from_str(&out).expect("JSON");
            let names = v["line_items"].to_string();
            assert!(names.contains("\\u001b[2J\\r\\nfake row"), "{names}");
        }
    }
    let text = std::fs::read_to_string(&svg).expect("svg");
    assert_no_raw_controls("svg", &text);
    let texts = svg_texts(&svg);
    assert!(texts.contains("<&> Kestrel Hill orchard"), "{texts}");
    assert!(texts.contains("\\u{1b}"), "{texts}");
    assert_eq!(png_size(&png), png_size(&png));
}

#[test]
fn a_log_named_with_control_characters_gives_a_well_formed_replay_plot() {
    let dir = tempfile::tempdir().expect("temp dir");
    let name = "node\u{1b}[31m\r<7>&\u{202e}.csv";
    let log = dir.path().join(name);
    std::fs::copy(
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../examples/logs/orchard-868.csv"),
        &log,
    )
    .expect("copy log");
    let svg = dir.path().join("r.svg");
    let o = run(&["replay", s(&log), "--plot", s(&svg)]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert_no_raw_controls("stdout", &String::from_utf8_lossy(&o.stdout));
    assert_no_raw_controls("svg", &std::fs::read_to_string(&svg).expect("svg"));
    let texts = svg_texts(&svg);
    assert!(
        texts.contains("replay of node\\u{1b}[31m\\r<7>&\\u{202e}.csv"),
        "{texts}"
    );
}
