//! Every example in the language reference (`netlists/README.md`) is loaded: blocks marked
//! `lam` must check clean, blocks marked `lam-bad` must be refused, so the document cannot
//! drift from the parser.

use lamina_netlist::{load_with, DiskReader, FileReader, LoadOptions, ReadError};
use std::path::Path;

struct Example<'a>(&'a str);

impl FileReader for Example<'_> {
    fn read(&self, path: &Path, max_bytes: usize) -> Result<String, ReadError> {
        if path == Path::new("netlists/example.lam") {
            Ok(self.0.to_string())
        } else {
            DiskReader.read(path, max_bytes)
        }
    }
}

#[test]
fn reference_examples_load_as_documented() {
    let doc = std::fs::read_to_string("netlists/README.md").unwrap();
    let mut good = 0;
    let mut bad = 0;
    let mut lines = doc.lines();
    while let Some(line) = lines.next() {
        let tag = line.trim();
        if tag != "```lam" && tag != "```lam-bad" {
            continue;
        }
        let mut block = String::new();
        for l in lines.by_ref() {
            if l.trim() == "```" {
                break;
            }
            block.push_str(l);
            block.push('\n');
        }
        let result = load_with(
            Path::new("netlists/example.lam"),
            &LoadOptions::default(),
            &Example(&block),
        );
        if tag == "```lam" {
            if let Err(e) = result {
                panic!("example should load:\n{block}\n{e}");
            }
            good += 1;
        } else {
            assert!(result.is_err(), "example should be refused:\n{block}");
            bad += 1;
        }
    }
    assert!(good >= 11 && bad >= 4, "{good} good, {bad} bad examples");
}
