//! The README's "Build and test" block lists exactly the lines of `.ci/run`.

use crate::util::repo_root;

#[test]
fn readme_matches_ci() {
    let readme = std::fs::read_to_string(repo_root().join("README.md")).unwrap();
    let ci = std::fs::read_to_string(repo_root().join(".ci/run")).unwrap();
    let section = readme
        .split("## Build and test")
        .nth(1)
        .expect("README has a Build and test section");
    let block = section
        .split("```")
        .nth(1)
        .expect("the section has a fenced block")
        .lines()
        .skip(1)
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>();
    let script: Vec<&str> = ci
        .lines()
        .map(str::trim)
        .filter(|l| {
            !l.is_empty() && !l.starts_with('#') && !l.starts_with("set ") && !l.starts_with("cd ")
        })
        .collect();
    assert_eq!(block, script, "README block and .ci/run differ");
    // The quick start names the two commands of a fresh clone.
    assert!(readme.contains("cargo run --release -- demo"));
    assert!(readme.contains("\ncargo test\n"));
}
