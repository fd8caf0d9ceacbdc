//! The committed demo data is exactly what the deterministic generator writes.

use super::common::repo;

#[test]
fn committed_demo_files_match_the_generator() {
    for (name, text) in tailpack::demo::render_demo_files() {
        let committed =
            std::fs::read_to_string(repo().join("config-demo/data").join(name)).unwrap();
        assert!(
            committed == text,
            "config-demo/data/{name} differs from `tailpack demo-data` output; regenerate it"
        );
        assert!(
            text.starts_with("# SYNTHETIC DEMO DATA"),
            "{name} says it is synthetic"
        );
    }
}
