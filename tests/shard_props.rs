//! Property tests of the shard assignment over random manifests: for N = 1, 2, 3, 7 the
//! shards partition the manifest's lines (every clip and every bad line in exactly one
//! shard), and the greedy longest-first rule keeps each shard within one clip of the mean.

use proptest::prelude::*;
use retake::shard::{Shard, keep};
use retake::transcript::read_manifest;

/// One manifest line: a clip with or without a duration, or a line that is not a clip.
fn line() -> impl Strategy<Value = Option<Option<f64>>> {
    prop_oneof![
        6 => (0.1f64..600.0).prop_map(|d| Some(Some(d))),
        2 => Just(Some(None)),
        1 => Just(None),
    ]
}

fn write(lines: &[Option<Option<f64>>]) -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let text: String = lines
        .iter()
        .enumerate()
        .map(|(i, l)| match l {
            Some(Some(d)) => format!(
                "{{\"id\":\"c{i}\",\"audio\":\"c{i}.wav\",\"text\":\"x\",\"duration\":{d}}}\n"
            ),
            Some(None) => format!("{{\"id\":\"c{i}\",\"audio\":\"c{i}.wav\",\"text\":\"x\"}}\n"),
            None => "not a clip\n".to_string(),
        })
        .collect();
    let path = dir.path().join("in.jsonl");
    std::fs::write(&path, text).unwrap();
    (dir, path)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn shards_partition_the_lines(lines in prop::collection::vec(line(), 0..120)) {
        let (_dir, path) = write(&lines);
        let whole = read_manifest(&path).unwrap();
        for count in [1usize, 2, 3, 7] {
            let mut owners = vec![Vec::new(); lines.len()];
            for index in 0..count {
                let mut m = read_manifest(&path).unwrap();
                keep(&mut m, Shard { index, count });
                for e in &m.entries {
                    owners[e.line - 1].push(index);
                }
                for p in &m.problems {
                    owners[p.line - 1].push(index);
                }
            }
            for (i, o) in owners.iter().enumerate() {
                prop_assert_eq!(o.len(), 1, "N={} line {} in shards {:?}", count, i + 1, o);
            }
            // Same clip set: the entries of the shards are exactly the manifest's.
            let clips = owners.iter().enumerate().filter(|(i, _)| lines[*i].is_some()).count();
            prop_assert_eq!(clips, whole.entries.len());
        }
    }

    #[test]
    fn no_shard_holds_more_than_the_mean_plus_one_clip(
        durations in prop::collection::vec(0.1f64..600.0, 1..200),
        count in prop::sample::select(vec![2usize, 3, 7]),
    ) {
        let lines: Vec<_> = durations.iter().map(|&d| Some(Some(d))).collect();
        let (_dir, path) = write(&lines);
        let load: Vec<f64> = (0..count)
            .map(|index| {
                let mut m = read_manifest(&path).unwrap();
                keep(&mut m, Shard { index, count });
                m.entries.iter().filter_map(|e| e.clip.duration).sum::<f64>()
            })
            .collect();
        // Greedy list scheduling (Graham, 1966): the last clip placed on the fullest shard
        // went to the lightest one, so that shard ends at most one clip above the mean.
        let mean = durations.iter().sum::<f64>() / count as f64;
        let longest = durations.iter().cloned().fold(0.0, f64::max);
        let max = load.iter().cloned().fold(0.0, f64::max);
        prop_assert!(max <= mean + longest + 1e-9, "largest {} mean {} longest {}", max, mean, longest);
    }
}
