//! The same seed gives the same file on one or two threads.

use crate::support::*;

#[test]
fn one_and_two_threads_give_identical_datasets() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let cfg = cfg.to_str().unwrap();
    // Enough particles for several parallel chunks, so two threads really split the work.
    let common = [
        "--set",
        "species.bead.count=9000",
        "--set",
        "integrator.steps=400",
        "--set",
        "output.record_every_steps=40",
    ];
    let mut a = vec!["run", cfg, "--out", "one.h5", "--threads", "1"];
    a.extend(common);
    ok(&thicket(dir.path(), &a));
    let mut b = vec!["run", cfg, "--out", "two.h5", "--threads", "2"];
    b.extend(common);
    ok(&thicket(dir.path(), &b));
    let one = datasets(&dir.path().join("one.h5"));
    let two = datasets(&dir.path().join("two.h5"));
    assert!(
        one.len() >= 6,
        "expected the trajectory datasets, found {:?}",
        one.iter().map(|d| &d.0).collect::<Vec<_>>()
    );
    assert_eq!(one.len(), two.len());
    for ((pa, da), (pb, db)) in one.iter().zip(&two) {
        assert_eq!(pa, pb);
        assert!(da == db, "{pa} differs between 1 and 2 threads");
    }
}
