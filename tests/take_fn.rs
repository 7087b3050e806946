//! The library's one take function gives exactly what `retake run` writes: for demo clips,
//! every take made in memory by `take::make_take` equals the written take sample for sample
//! (16-bit, through the writer's one scale, `dsp::pcm16`) and its rewritten labels and origin
//! equal the manifest record. An embedder (the Python package) calling it cannot disagree
//! with the command line.

mod common;

use retake::audio::{self, ChannelPolicy};
use retake::dsp::pcm16;
use retake::files::file_stem;
use retake::take::{at_plan_rate, make_take};
use retake::transcript::read_manifest;

#[test]
fn takes_made_in_memory_equal_the_takes_run_writes() {
    let demo = common::demo();
    let recipe = demo.join("recipe.toml");
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("out");
    let o = common::retake(&[
        "run",
        recipe.to_str().unwrap(),
        "-i",
        demo.join("manifest.jsonl").to_str().unwrap(),
        "-o",
        out.to_str().unwrap(),
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let written = common::read_jsonl(&out.join("manifest.jsonl"));

    let plan = retake::recipe::load(&recipe).unwrap();
    let manifest = read_manifest(&demo.join("manifest.jsonl")).unwrap();
    let mut compared = 0;
    for entry in manifest.entries.iter().take(4) {
        let clip = &entry.clip;
        let source = audio::decode(&demo.join(&clip.audio), ChannelPolicy::Mix).unwrap();
        let source_rate = source.rate;
        let base = at_plan_rate(source, &plan);
        for k in 0..plan.takes {
            let take = make_take(&plan, clip, &base, k, source_rate, &file_stem(&clip.id)).unwrap();
            let id = format!("{}.t{k}", clip.id);
            let record = written
                .iter()
                .find(|r| r["id"] == id.as_str())
                .unwrap_or_else(|| panic!("{id} not in the run's manifest"));

            // Audio: the file run wrote holds the in-memory take at 16 bits, sample for sample.
            let file = out.join(record["audio"].as_str().unwrap());
            let mut reader = hound::WavReader::open(&file).unwrap();
            let on_disk: Vec<i16> = reader.samples::<i16>().map(Result::unwrap).collect();
            let in_memory: Vec<i16> = take
                .audio
                .samples
                .iter()
                .map(|&x| pcm16::to_i16(x))
                .collect();
            assert_eq!(on_disk.len(), in_memory.len(), "{id}: length");
            let differ = on_disk
                .iter()
                .zip(&in_memory)
                .filter(|(a, b)| a != b)
                .count();
            assert_eq!(differ, 0, "{id}: {differ} samples differ");

            // Labels, text, duration and origin: the same values as the manifest record.
            let made = serde_json::to_value(&take.clip).unwrap();
            for field in ["lines", "text", "origin", "duration"] {
                assert_eq!(made[field], record[field], "{id}: {field}");
            }
            compared += 1;
        }
    }
    assert_eq!(compared, 4 * plan.takes as usize);
}
