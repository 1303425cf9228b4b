//! DEVELOPERS.md stays true: every path it names exists.

use crate::util::repo_root;

#[test]
fn developers_guide_names_only_existing_paths() {
    let text = std::fs::read_to_string(repo_root().join("DEVELOPERS.md")).unwrap();
    let mut checked = 0;
    for (k, piece) in text.split('`').enumerate() {
        // Odd pieces are inside backticks; a path has a slash and no space.
        if k % 2 == 0 || piece.contains(' ') || !piece.contains('/') {
            continue;
        }
        let path = piece.trim_end_matches('/');
        assert!(
            repo_root().join(path).exists(),
            "DEVELOPERS.md names {piece}, which does not exist"
        );
        checked += 1;
    }
    assert!(checked >= 20, "only {checked} paths found in DEVELOPERS.md");
}
