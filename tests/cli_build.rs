//! `quarry build` and `quarry inspect` end to end, on the real binary: the demo library,
//! bad input files that are reported and skipped, and refusals that lose nothing.

use std::path::Path;
use std::process::{Command, Output};

fn quarry(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_quarry"))
        .args(args)
        .env("NO_COLOR", "1")
        .output()
        .expect("the quarry binary runs")
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

#[test]
fn build_and_inspect_the_demo_library() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("idx");
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let o = quarry(&[
        "build",
        fixtures.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "build failed: {}", text(&o.stderr));
    assert!(text(&o.stdout).contains("declarations"));

    let o = quarry(&["inspect", out.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", text(&o.stderr));
    let summary: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let n = summary["counts"]["declarations"].as_u64().unwrap();
    assert!(n > 0);

    let o = quarry(&["inspect", out.to_str().unwrap(), "--all", "--json"]);
    assert!(o.status.success());
    let lines: Vec<serde_json::Value> = text(&o.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(lines.len() as u64, n);
    for field in [
        "name",
        "kind",
        "module",
        "file",
        "line",
        "statement",
        "proof_premises",
    ] {
        assert!(lines[0].get(field).is_some(), "--all lacks `{field}`");
    }
    // One declaration by its full name, text and JSON.
    let name = lines[0]["name"].as_str().unwrap().to_string();
    let o = quarry(&["inspect", out.to_str().unwrap(), &name]);
    assert!(o.status.success());
    assert!(text(&o.stdout).contains(&name));
    let o = quarry(&["inspect", out.to_str().unwrap(), &name, "--json"]);
    let one: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(one["name"], name.as_str());
    assert!(one.get("dependents").is_some());

    let o = quarry(&[
        "inspect",
        out.to_str().unwrap(),
        "No.Such.declaration_anywhere",
    ]);
    assert_eq!(o.status.code(), Some(4));
    assert!(text(&o.stderr).contains("No.Such.declaration_anywhere"));

    let o = quarry(&["inspect", out.to_str().unwrap(), "--verify"]);
    assert!(o.status.success(), "{}", text(&o.stderr));

    // A second build replaces the first atomically and keeps it as the previous generation.
    let o = quarry(&[
        "build",
        fixtures.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success());
    let gens = std::fs::read_dir(&out)
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .starts_with("gen-")
        })
        .count();
    assert_eq!(gens, 2);
}

#[test]
fn bad_files_are_reported_and_skipped_and_the_rest_is_read() {
    let tmp = tempfile::tempdir().unwrap();
    let lib = tmp.path().join("lib");
    std::fs::create_dir_all(&lib).unwrap();
    std::fs::write(
        lib.join("Good.v"),
        "Definition slot_count : nat := 4.\nLemma slot_count_pos : 0 < slot_count.\nProof. unfold slot_count. repeat constructor. Qed.\n",
    )
    .unwrap();
    std::fs::write(lib.join("Latin1.v"), b"(* caf\xe9 *)\nDefinition x := 1.\n").unwrap();
    std::fs::write(lib.join("Blob.v"), b"\x7fELF\x00\x00binary").unwrap();
    std::fs::write(lib.join("Empty.v"), b"").unwrap();
    std::fs::write(lib.join("Huge.v"), vec![b'a'; (1 << 20) + 10]).unwrap();
    let out = tmp.path().join("idx");
    let o = quarry(&[
        "build",
        lib.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    let err = text(&o.stderr);
    assert!(
        o.status.success(),
        "build should succeed with warnings: {err}"
    );
    assert!(
        err.contains("Latin1.v:1") && err.contains("not UTF-8"),
        "{err}"
    );
    assert!(err.contains("Blob.v:1") && err.contains("NUL"), "{err}");
    assert!(err.contains("Empty.v") && err.contains("empty"), "{err}");
    assert!(err.contains("Huge.v:1") && err.contains("limit"), "{err}");
    let o = quarry(&["inspect", out.to_str().unwrap(), "--json"]);
    let summary: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(summary["counts"]["files"], 5);
    assert_eq!(summary["counts"]["files_with_errors"], 3);
}

#[test]
fn nothing_readable_fails_and_writes_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let lib = tmp.path().join("lib");
    std::fs::create_dir_all(&lib).unwrap();
    std::fs::write(lib.join("Blob.lean"), b"\x00\x01\x02").unwrap();
    let out = tmp.path().join("idx");
    let o = quarry(&[
        "build",
        lib.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains("could be read"));
    assert!(!out.exists());

    let o = quarry(&[
        "build",
        tmp.path().join("missing").to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains("does not exist"));
}

#[test]
fn a_folder_that_is_not_an_index_is_never_overwritten_or_opened() {
    let tmp = tempfile::tempdir().unwrap();
    let precious = tmp.path().join("notes");
    std::fs::create_dir_all(&precious).unwrap();
    std::fs::write(precious.join("thesis.tex"), "keep me").unwrap();
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let o = quarry(&[
        "build",
        fixtures.to_str().unwrap(),
        "--out",
        precious.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains("refusing"));
    assert_eq!(
        std::fs::read_to_string(precious.join("thesis.tex")).unwrap(),
        "keep me"
    );
    assert_eq!(std::fs::read_dir(&precious).unwrap().count(), 1);

    let o = quarry(&["inspect", precious.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains("not a quarry index"));
}

#[test]
fn a_damaged_index_is_refused_with_the_file_named() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("idx");
    let fixtures = Path::new(env!("CARGO_MANIFEST_DIR")).join("index_fixtures");
    let o = quarry(&[
        "build",
        fixtures.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success());
    let current = std::fs::read_to_string(out.join("CURRENT")).unwrap();
    let gen = out.join(current.trim());
    let part = gen.join("library.bin");
    let mut bytes = std::fs::read(&part).unwrap();
    let mid = bytes.len() / 2;
    bytes[mid] ^= 0x40;
    std::fs::write(&part, &bytes).unwrap();
    let o = quarry(&["inspect", out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    let err = text(&o.stderr);
    assert!(
        err.contains("library.bin") && err.contains("checksum"),
        "{err}"
    );
    let o = quarry(&["inspect", out.to_str().unwrap(), "--verify"]);
    assert_eq!(o.status.code(), Some(1));

    // A truncated part names the sizes.
    std::fs::write(&part, &bytes[..10]).unwrap();
    let o = quarry(&["inspect", out.to_str().unwrap()]);
    assert!(text(&o.stderr).contains("truncated"), "{}", text(&o.stderr));

    // A wrong format version is refused with both versions named.
    let manifest = gen.join("manifest.json");
    let m = std::fs::read_to_string(&manifest).unwrap();
    std::fs::write(
        &manifest,
        m.replace("\"format_version\": 1", "\"format_version\": 99"),
    )
    .unwrap();
    let o = quarry(&["inspect", out.to_str().unwrap()]);
    let err = text(&o.stderr);
    assert!(
        err.contains("version 99") && err.contains("manifest.json"),
        "{err}"
    );
}
