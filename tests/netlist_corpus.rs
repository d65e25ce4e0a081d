//! Golden corpora of circuit files: every example under `netlists/` and `tests/corpus/good`
//! checks clean; every file under `tests/corpus/bad` is refused with the diagnostic kind and
//! position its first line names (`# expect: Kind line:column`), whatever the wording.

use lamina_netlist::{load_file, ErrorKind, LoadOptions};
use std::path::{Path, PathBuf};

fn lam_files(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for entry in std::fs::read_dir(dir).unwrap() {
        let p = entry.unwrap().path();
        if p.is_dir() {
            out.extend(lam_files(&p));
        } else if p.extension().is_some_and(|e| e == "lam") {
            out.push(p);
        }
    }
    out.sort();
    out
}

fn kind_named(name: &str) -> ErrorKind {
    use ErrorKind::*;
    let all = [
        BadCharacter,
        BadNumber,
        BadString,
        Expected,
        UnknownUnit,
        Unknown,
        Duplicate,
        UnitMismatch,
        MissingUnit,
        Unconnected,
        ConnectedTwice,
        BadValue,
        IncludeCycle,
        Io,
        Limit,
    ];
    *all.iter()
        .find(|k| format!("{k:?}") == name)
        .unwrap_or_else(|| panic!("unknown kind {name}"))
}

#[test]
fn example_and_good_files_check_clean() {
    let mut files = lam_files(Path::new("netlists"));
    files.extend(lam_files(Path::new("tests/corpus/good")));
    assert!(files.len() >= 12, "{files:?}");
    for f in files {
        if let Err(e) = load_file(&f, &LoadOptions::default()) {
            panic!("{} should check clean:\n{e}", f.display());
        }
    }
}

#[test]
fn bad_files_report_the_expected_kind_and_place() {
    let files = lam_files(Path::new("tests/corpus/bad"));
    assert!(files.len() >= 20);
    let mut wrong = Vec::new();
    for f in files {
        let text = std::fs::read_to_string(&f).unwrap();
        let expect = text
            .lines()
            .next()
            .and_then(|l| l.strip_prefix("# expect: "))
            .expect("expect line");
        let (kind, place) = expect.split_once(' ').unwrap();
        let (line, col) = place.split_once(':').unwrap();
        let (kind, line, col): (ErrorKind, usize, usize) = (
            kind_named(kind),
            line.parse().unwrap(),
            col.parse().unwrap(),
        );
        let failure = match load_file(&f, &LoadOptions::default()) {
            Ok(_) => panic!("{} should be refused", f.display()),
            Err(e) => e,
        };
        let found: Vec<(ErrorKind, usize, usize)> = failure
            .diagnostics
            .iter()
            .map(|d| {
                let (l, c) = failure.sources.line_column(d.span.file, d.span.start);
                (d.kind, l, c)
            })
            .collect();
        if !found.contains(&(kind, line, col)) {
            wrong.push(format!(
                "{}: expected {kind:?} at {line}:{col}, found {found:?}\n{failure}",
                f.display()
            ));
        }
    }
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
}

/// Most refusals say what to change: the first diagnostic of at least 80 % of the bad corpus
/// carries a help line.
#[test]
fn most_refusals_carry_a_help_line() {
    let files = lam_files(Path::new("tests/corpus/bad"));
    let helped = files
        .iter()
        .filter(|f| {
            load_file(f, &LoadOptions::default())
                .err()
                .and_then(|e| e.diagnostics.first().map(|d| d.help.is_some()))
                .unwrap_or(false)
        })
        .count();
    assert!(
        helped * 10 >= files.len() * 8,
        "{helped} of {} refusals carry a help line",
        files.len()
    );
}

/// A bad value in a device card is reported once, at the card, however many instances use it;
/// the first instance is a secondary label.
#[test]
fn a_card_error_is_reported_once_at_the_card() {
    let text = "device n2d : sheet_fet {\n    channel = MoS2, insulator = hBN, gate = Au\n    \
                insulator_layers = 10, temperature = -3 K\n}\n\
                voltage_source vd (pos = d, neg = ground) { dc = 1 V }\n\
                for i in 0..21 {\n    n2d m[i] (drain = d, gate = d, source = ground)\n}\n";
    let f = lamina_netlist::load_source("card.lam", text, &LoadOptions::default())
        .err()
        .unwrap();
    assert_eq!(f.diagnostics.len(), 1, "{f}");
    let d = &f.diagnostics[0];
    assert_eq!(f.sources.line_column(d.span.file, d.span.start).0, 3);
    assert_eq!(d.notes.len(), 1, "{f}");
    assert_eq!(
        f.sources
            .line_column(d.notes[0].0.file, d.notes[0].0.start)
            .0,
        7
    );
}

/// Work that cannot fit in the limits is refused before any of it is done: the projected
/// count is named, and nothing was placed.
#[test]
fn multiplied_work_is_refused_up_front() {
    for (text, what) in [
        (
            "for i in 0..10000000 {\n for j in 0..10000000 {\n  resistor r[i * 10000000 + j] (a = n, b = ground) { resistance = 1 kOhm }\n }\n}\n",
            "1.000e14",
        ),
        (
            "cell a(p) {\n resistor r (a = p, b = ground) { resistance = 1 kOhm }\n}\n\
             cell b(p) {\n for i in 0..5000 { a x[i] (p = p) }\n}\n\
             for i in 0..5000 { b y[i] (p = n) }\n",
            "2.500e7",
        ),
    ] {
        let f = lamina_netlist::load_source("work.lam", text, &LoadOptions::default())
            .err()
            .unwrap();
        assert_eq!(f.diagnostics.len(), 1, "{f}");
        assert_eq!(f.diagnostics[0].kind, ErrorKind::Limit);
        assert!(f.diagnostics[0].message.contains(what), "{f}");
    }
}

#[test]
fn overrides_replace_parameters_and_unknown_ones_are_named() {
    let opts = LoadOptions {
        overrides: vec![("stages".into(), "7".into())],
        ..LoadOptions::default()
    };
    let d = load_file(Path::new("netlists/ring-21.lam"), &opts).unwrap();
    assert_eq!(d.summary.elements["square_nfet"], 7);
    let opts = LoadOptions {
        overrides: vec![("stage".into(), "7".into())],
        ..LoadOptions::default()
    };
    let f = load_file(Path::new("netlists/ring-21.lam"), &opts)
        .err()
        .unwrap();
    assert_eq!(f.diagnostics[0].kind, ErrorKind::Unknown);
    assert!(f.diagnostics[0]
        .help
        .as_deref()
        .unwrap_or("")
        .contains("stages"));
    let opts = LoadOptions {
        overrides: vec![("vdd".into(), "1 nm".into())],
        ..LoadOptions::default()
    };
    let f = load_file(Path::new("netlists/ring-21.lam"), &opts)
        .err()
        .unwrap();
    assert!(
        f.diagnostics
            .iter()
            .any(|d| d.kind == ErrorKind::UnitMismatch),
        "{f}"
    );
}

#[test]
fn hierarchical_names_follow_the_documented_scheme() {
    let d = load_file(
        Path::new("tests/corpus/good/nested.lam"),
        &LoadOptions::default(),
    )
    .unwrap();
    let c = &d.circuit;
    assert!(c.find_element("cell[5].res").is_some());
    assert!(c.find_node("cell[5].mid").is_some());
    assert!(c.find_node("x[3]").is_some());
    assert_eq!(d.summary.elements["resistor"], 9);
}

#[test]
fn element_and_depth_limits_are_reported() {
    use lamina_netlist::{load_source, Limits};
    let text = "cell c0(p) {\n    resistor r (a = p, b = ground) { resistance = 1 kOhm }\n}\n\
                cell c1(p) {\n    c0 x (p = p)\n    c0 y (p = p)\n}\n\
                for i in 0..100000 { c1 top[i] (p = n) }\n";
    let limits = Limits {
        max_elements: 1000,
        ..Limits::default()
    };
    let f = load_source(
        "limit.lam",
        text,
        &LoadOptions {
            limits,
            ..LoadOptions::default()
        },
    )
    .err()
    .unwrap();
    assert!(
        f.diagnostics
            .iter()
            .any(|d| d.kind == ErrorKind::Limit && d.message.contains("1000")),
        "{f}"
    );
    assert!(
        f.diagnostics.len() <= 5,
        "the limit stops elaboration: {} diagnostics",
        f.diagnostics.len()
    );
    let deep = format!("param x = {}1{}\n", "(".repeat(200), ")".repeat(200));
    let f = load_source("deep.lam", &deep, &LoadOptions::default())
        .err()
        .unwrap();
    assert!(
        f.diagnostics.iter().any(|d| d.kind == ErrorKind::Limit),
        "{f}"
    );
}

#[test]
fn a_node_with_one_pin_is_a_warning_with_a_suggestion() {
    let text = "voltage_source s (pos = vdd, neg = ground) { dc = 1 V }\n\
                resistor r1 (a = vdd, b = mid) { resistance = 1 kOhm }\n\
                resistor r2 (a = mdi, b = ground) { resistance = 1 kOhm }\n\
                resistor r3 (a = mid, b = ground) { resistance = 1 kOhm }\n";
    let d = lamina_netlist::load_source("w.lam", text, &LoadOptions::default()).unwrap();
    assert_eq!(d.warnings.len(), 1);
    assert!(d.warnings[0].message.contains("`mdi`"));
    assert_eq!(d.warnings[0].help.as_deref(), Some("did you mean `mid`?"));
    let (line, col) = d
        .sources
        .line_column(d.warnings[0].span.file, d.warnings[0].span.start);
    assert_eq!((line, col), (3, 18));
}

#[test]
fn syntax_trees_of_every_corpus_file_are_lossless() {
    let mut files = lam_files(Path::new("netlists"));
    files.extend(lam_files(Path::new("tests/corpus")));
    for f in files {
        let text = std::fs::read_to_string(&f).unwrap();
        let mut diags = Vec::new();
        let tree = lamina_netlist::parser::SyntaxTree::parse(0, &text, &mut diags);
        assert_eq!(tree.to_source(&text), text, "{}", f.display());
    }
}

/// Includes of anything but a regular file are refused before they are opened for reading:
/// a character device that never ends and a FIFO that would block forever.
#[test]
fn includes_of_devices_and_fifos_are_refused() {
    let dir = std::env::temp_dir().join(format!("lamina-fifo-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let fifo = dir.join("pipe.lam");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .unwrap();
    assert!(made.success(), "mkfifo is needed for this test");
    for target in ["/dev/zero", fifo.to_str().unwrap()] {
        let text = format!("include \"{target}\"\n");
        let f = lamina_netlist::load_source("inc.lam", &text, &LoadOptions::default())
            .err()
            .unwrap();
        assert_eq!(f.diagnostics.len(), 1, "{f}");
        assert_eq!(f.diagnostics[0].kind, ErrorKind::Io, "{f}");
        assert!(
            f.diagnostics[0].message.contains("not a regular file"),
            "{f}"
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}
