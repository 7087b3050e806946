//! The clip id -> file name rule (`files::file_stem`): different ids never share a name,
//! every name fits the 255-byte limit of common file systems (ext4, XFS, APFS, NTFS) with
//! the longest suffix the tool adds, and ordinary ids are kept as they are.

use proptest::prelude::*;
use retake::files::{MAX_STEM_BYTES, file_stem, is_temp_name, temp_path};

/// The longest suffix added to a stem: a stem file of take 9999 of step 999, written under
/// its temporary name by a process with a 7-digit id after 2^64 - 1 writes.
const LONGEST_SUFFIX: &str = ".t9999.s999-noise.wav.9999999.18446744073709551615.part";

/// Ids from a small alphabet rich in the characters the rule treats specially, so that
/// near-misses (an id equal to another's escaped or hashed form) are common.
fn tricky_id() -> impl Strategy<Value = String> {
    prop::collection::vec(
        prop::sample::select(vec![
            "a", "b", "1", "_", "-", ".", "/", " ", "%", "2", "F", "~", "é", "\\", "..",
        ]),
        0..12,
    )
    .prop_map(|parts| parts.concat())
}

fn any_id() -> impl Strategy<Value = String> {
    prop_oneof![
        tricky_id(),
        ".{0,400}",
        "[a-z0-9_.-]{150,170}",
        // A readable part shared with a long id, then a differing tail.
        ("[a-z]{1,3}", 0usize..3).prop_map(|(t, n)| format!("{}{t}{}", "x".repeat(170), n)),
    ]
}

fn check_name(id: &str) -> Result<(), TestCaseError> {
    let stem = file_stem(id);
    prop_assert!(stem.len() <= MAX_STEM_BYTES, "{} bytes", stem.len());
    prop_assert!((stem.clone() + LONGEST_SUFFIX).len() < 255);
    prop_assert!(!stem.is_empty() && !stem.starts_with('.'), "{stem:?}");
    prop_assert!(
        stem.bytes()
            .all(|b| b.is_ascii_graphic() && b != b'/' && b != b'\\'),
        "{stem:?}"
    );
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(4000))]

    #[test]
    fn different_ids_get_different_names(a in any_id(), b in any_id()) {
        check_name(&a)?;
        prop_assume!(a != b);
        prop_assert_ne!(file_stem(&a), file_stem(&b));
    }

    /// The adversarial case: an id spelled as another id's file name.
    #[test]
    fn an_id_spelled_as_another_ids_name_gets_its_own(a in any_id()) {
        let spelled = file_stem(&a);
        prop_assume!(spelled != a);
        prop_assert_ne!(file_stem(&spelled), file_stem(&a));
        // And the form the rule used before, a cleaned id plus a hash.
        let cleaned: String = a
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() || "-_.".contains(c) { c } else { '_' })
            .collect();
        let old = format!("{cleaned}-bfc812e8");
        prop_assume!(old != a);
        prop_assert_ne!(file_stem(&old), file_stem(&a));
    }
}

#[test]
fn the_pair_that_shared_one_take_file_does_not_now() {
    // Before, both were `north_dock_1-bfc812e8`.
    assert_ne!(
        file_stem("north/dock 1"),
        file_stem("north_dock_1-bfc812e8")
    );
}

#[test]
fn ordinary_ids_stay_as_they_are() {
    for id in [
        "dock-01",
        "pick-a-001",
        "aisle_14.bay3",
        "NIGHT-shift-2",
        "0",
    ] {
        assert_eq!(file_stem(id), id);
    }
    // Others stay readable: only the odd bytes change.
    assert_eq!(file_stem("north/dock 1"), "north%2Fdock%201");
}

#[test]
fn temporary_names_are_recognised_and_fit() {
    let stem = file_stem(&"z".repeat(500));
    let tmp = temp_path(std::path::Path::new(&format!(
        "{stem}.t9999.s999-noise.wav"
    )));
    let name = tmp.file_name().unwrap().to_str().unwrap();
    assert!(is_temp_name(name), "{name}");
    assert!(name.len() < 255, "{}", name.len());
}
