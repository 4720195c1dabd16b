//! The README's examples stay true: its minimal job parses, and its two commands exist.

use std::path::Path;

fn readme() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap()
}

#[test]
fn minimal_job_in_the_readme_is_valid() {
    let text = readme();
    let start = text
        .find("A minimal job:")
        .expect("README has a minimal job");
    let block = &text[start..];
    let yaml_start = block.find("```yaml\n").unwrap() + "```yaml\n".len();
    let yaml = &block[yaml_start..yaml_start + block[yaml_start..].find("```").unwrap()];
    let d = tempfile::tempdir().unwrap();
    std::fs::create_dir(d.path().join("grids")).unwrap();
    std::fs::write(d.path().join("grids/2030.tif"), b"x").unwrap();
    std::fs::write(d.path().join("grids/2034.tif"), b"x").unwrap();
    let job = dunereel::job::parse(&d.path().join("job.yaml"), yaml.to_string()).unwrap();
    assert_eq!(job.surveys.len(), 2);
}

#[test]
fn the_two_commands_are_the_ones_that_work() {
    let text = readme();
    assert!(text.contains("cargo run --release -- render jobs/demo.yaml"));
    assert!(text.contains("\ncargo test "));
    assert!(Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("jobs/demo.yaml")
        .is_file());
    let ci =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join(".ci/run")).unwrap();
    assert!(
        ci.lines().any(|l| l.trim() == "cargo test"),
        ".ci/run runs the README's test command"
    );
}
