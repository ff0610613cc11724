//! The JSON Schema of the design file: generated from the Rust types, checked in, and pinned.

use crate::util::{Test, example_files, root};

#[test]
fn checked_in_schema_matches_the_types() {
    let generated = joulepath::spec::design_schema();
    let file = std::fs::read_to_string(root().join("schemas/design.schema.json"))
        .expect("schemas/design.schema.json");
    assert!(
        generated == file,
        "schemas/design.schema.json is out of date: run `cargo run -- schema -o schemas/design.schema.json`"
    );
}

#[test]
fn schema_command_prints_the_same() {
    let out = Test::new().args(&["schema"]).expect_code(0);
    assert_eq!(out.stdout, joulepath::spec::design_schema());
}

#[test]
fn schema_describes_every_top_level_key() {
    let v: serde_json::Value = serde_json::from_str(&joulepath::spec::design_schema()).unwrap();
    let props = v["properties"].as_object().expect("properties");
    for key in [
        "design", "ambient", "cells", "battery", "stages", "loads", "modes", "profile",
    ] {
        assert!(props.contains_key(key), "no `{key}` in the schema");
    }
    assert_eq!(v["required"], serde_json::json!(["battery"]));
    let kinds = &v["$defs"]["StageKindSpec"];
    let text = kinds.to_string();
    for k in ["buck", "boost", "buck-boost", "linear", "switch"] {
        assert!(
            text.contains(&format!("\"{k}\"")),
            "stage kind `{k}` missing: {text}"
        );
    }
}

#[test]
fn examples_point_editors_at_the_schema() {
    for f in example_files() {
        let text = std::fs::read_to_string(&f).unwrap();
        assert_eq!(
            text.lines().next(),
            Some("# yaml-language-server: $schema=../schemas/design.schema.json"),
            "{}",
            f.display()
        );
    }
}
