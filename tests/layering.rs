//! The layers of lumisorb depend one way only (DEVELOPERS.md, "Architecture"). This test reads
//! the library's sources and checks every `crate::<module>` path outside comments against the
//! layer map, so a dependency that runs upwards fails CI instead of creeping in.
//! (A structural check of the project's own rule; no external source.)

use std::fs;
use std::path::Path;

/// Modules every layer may use: the flag vocabulary, the math door, raw counts and the
/// statistics helpers.
const UTILITIES: &[&str] = &["flags", "math", "counts", "student_t", "incomplete_beta"];

/// Layer rank of each module: a module may use modules of its own or a lower rank.
const RANKS: &[(&str, u8)] = &[
    ("accumulator", 1),
    ("robust", 1),
    ("net_signal", 1),
    ("photometry", 2),
    ("calibration", 3),
    ("limits", 3),
    ("quantification", 4),
    ("session", 5),
    ("instrument", 5),
    ("persistence", 6),
    ("sim", 7),
];

fn rank(module: &str) -> Option<u8> {
    RANKS.iter().find(|(m, _)| *m == module).map(|(_, r)| *r)
}

/// Whether `from` may use `to`.
fn allowed(from: &str, to: &str) -> bool {
    if from == to || UTILITIES.contains(&to) {
        return true;
    }
    match (from, to) {
        // Nothing in the library depends on the simulator.
        (_, "sim") => false,
        // The simulator stands in for hardware: it implements the instrument traits and may
        // use the layers the instrument uses.
        ("sim", t) => t == "instrument" || rank(t).is_some_and(|r| r <= 2),
        // Hardware code holds no chemistry: the instrument layer knows counts and absorbance,
        // not calibrations, concentrations or recorded sessions.
        ("instrument", t) => rank(t).is_some_and(|r| r <= 2),
        ("session", "instrument") => false,
        ("persistence", "instrument") => false,
        (f, t) => matches!((rank(f), rank(t)), (Some(a), Some(b)) if b <= a),
    }
}

/// The top-level module a source file belongs to (`src/session/reader.rs` -> `session`).
fn module_of(path: &Path, src: &Path) -> Option<String> {
    let rel = path.strip_prefix(src).ok()?;
    let first = rel.components().next()?.as_os_str().to_str()?;
    Some(first.trim_end_matches(".rs").to_string())
}

fn visit(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
    for entry in fs::read_dir(dir).expect("source folder readable") {
        let path = entry.expect("directory entry").path();
        if path.is_dir() {
            visit(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

#[test]
fn dependencies_run_one_way() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    visit(&src, &mut files);
    let mut violations = Vec::new();
    for file in &files {
        let Some(from) = module_of(file, &src) else {
            continue;
        };
        if from == "lib" {
            continue;
        }
        assert!(
            rank(&from).is_some() || UTILITIES.contains(&from.as_str()),
            "module {from} is not in the layer map of tests/layering.rs (and DEVELOPERS.md)"
        );
        let text = fs::read_to_string(file).expect("source readable");
        for (n, line) in text.lines().enumerate() {
            let code = line.trim_start();
            if code.starts_with("//") {
                continue;
            }
            let code = code.split("//").next().unwrap_or("");
            for (i, _) in code.match_indices("crate::") {
                let rest = &code[i + "crate::".len()..];
                let to: String = rest
                    .chars()
                    .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                    .collect();
                // `crate::Type`: a root re-export of the core photometry types.
                let root_item = to.chars().next().is_some_and(|c| c.is_ascii_uppercase());
                if to.is_empty() || root_item {
                    continue;
                }
                if !allowed(&from, &to) {
                    violations.push(format!("{}:{}: {from} uses {to}", file.display(), n + 1));
                }
            }
        }
    }
    assert!(
        violations.is_empty(),
        "upward dependencies:\n{}",
        violations.join("\n")
    );
}

#[test]
fn the_rules_themselves() {
    assert!(allowed("photometry", "net_signal"));
    assert!(allowed("quantification", "calibration"));
    assert!(allowed("persistence", "session"));
    assert!(!allowed("net_signal", "photometry"));
    assert!(!allowed("calibration", "quantification"));
    assert!(!allowed("instrument", "calibration"));
    assert!(!allowed("instrument", "session"));
    assert!(!allowed("session", "sim"));
    assert!(allowed("sim", "instrument"));
    assert!(!allowed("sim", "calibration"));
}
