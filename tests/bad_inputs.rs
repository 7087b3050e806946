//! Bad input of every kind, one row each: whatever comes in, the real binary never panics
//! or hangs, exits with the documented code, and says what is wrong in the user's terms,
//! naming the file, the line and the field where there are ones.
//!
//! A new case is one row in [`cases`]: the files to put in a fresh folder, the command, the
//! exit code, and what the output must say. `{d}` in a command or fragment stands for the
//! folder. The output searched is stdout, stderr and, after `run`, `out/rejects.jsonl`.
//! Exit codes: 0 done, 1 the command could not finish, 2 the command line or recipe is
//! wrong, 3 done with rejects (or found problems, for `check`) (README, "Exit status").

mod common;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// The long-recording slicing command's name (one place to change it).
const SLICE: &str = "slice";

/// Parser phrasing that must never reach a user.
const PARSER_PHRASES: [&str; 8] = [
    "expected f64",
    "EOF while parsing",
    "expected struct",
    "invalid type:",
    "expected value at",
    "panicked",
    "RUST_BACKTRACE",
    "expected `,` or `}`",
];

/// What goes into a case's folder.
enum Body {
    Text(String),
    Bytes(Vec<u8>),
    Pcm16 {
        rate: u32,
        samples: Vec<f32>,
    },
    Float {
        rate: u32,
        samples: Vec<f32>,
    },
    /// A 16-bit WAV cut to its first `keep` bytes.
    Cut {
        rate: u32,
        samples: Vec<f32>,
        keep: usize,
    },
    Fifo,
    Dir,
}

/// One bad input and what must come of it.
struct Case {
    name: &'static str,
    files: Vec<(&'static str, Body)>,
    args: Vec<&'static str>,
    code: i32,
    /// The file the message must name (a fragment of its path), if any.
    file: Option<&'static str>,
    /// The line it must name.
    line: Option<usize>,
    /// The field it must name.
    field: Option<&'static str>,
    /// Further fragments the output must hold.
    says: Vec<&'static str>,
    /// Files that must not exist afterwards (relative to the folder).
    absent: Vec<&'static str>,
}

fn case(name: &'static str, args: &[&'static str], code: i32) -> Case {
    Case {
        name,
        files: Vec::new(),
        args: args.to_vec(),
        code,
        file: None,
        line: None,
        field: None,
        says: Vec::new(),
        absent: Vec::new(),
    }
}

impl Case {
    fn with(mut self, path: &'static str, body: Body) -> Self {
        self.files.push((path, body));
        self
    }
    fn manifest(self, text: &str) -> Self {
        self.with("in.jsonl", Body::Text(text.to_string()))
    }
    fn at(mut self, file: &'static str, line: Option<usize>, field: Option<&'static str>) -> Self {
        self.file = Some(file);
        self.line = line;
        self.field = field;
        self
    }
    fn says(mut self, fragment: &'static str) -> Self {
        self.says.push(fragment);
        self
    }
    fn absent(mut self, path: &'static str) -> Self {
        self.absent.push(path);
        self
    }
}

const GOOD: &str = r#"{"id":"a","audio":"a.wav","lines":[{"start":0.1,"end":0.9,"text":"bay three","speaker":"p1","words":[{"start":0.1,"end":0.4,"text":"bay"},{"start":0.5,"end":0.9,"text":"three"}]}]}"#;

const RECIPE: &str = "takes = 1\nrate = 16000\n[[step]]\ndo = \"gain\"\ndb = -3.0\n";

/// The good clip with one piece of its text replaced.
fn good_with(from: &str, to: &str) -> String {
    assert!(GOOD.contains(from), "{from}");
    GOOD.replacen(from, to, 1) + "\n"
}

fn tone(rate: u32, secs: f64) -> Vec<f32> {
    common::sine(440.0, secs, rate, 0.5)
}

fn with_sample(mut x: Vec<f32>, at: usize, v: f32) -> Vec<f32> {
    x[at] = v;
    x
}

const CHECK: [&str; 2] = ["check", "{d}/in.jsonl"];
const RUN: [&str; 6] = [
    "run",
    "{d}/recipe.toml",
    "-i",
    "{d}/in.jsonl",
    "-o",
    "{d}/out",
];

fn check_row(name: &'static str, manifest: &str) -> Case {
    case(name, &CHECK, 3).manifest(manifest)
}

fn run_row(name: &'static str, manifest: &str) -> Case {
    case(name, &RUN, 3).manifest(manifest)
}

fn recipe_row(name: &'static str, recipe: &str) -> Case {
    case(name, &RUN, 2)
        .manifest(&(GOOD.to_string() + "\n"))
        .with("recipe.toml", Body::Text(recipe.to_string()))
}

/// An import of `site/` holding one good pair (`a`) and the audio `b.wav`; the row adds
/// what goes wrong.
fn import_row(name: &'static str) -> Case {
    let wav = || Body::Pcm16 {
        rate: 16_000,
        samples: tone(16_000, 1.0),
    };
    case(name, &["import", "{d}/site", "-o", "{d}/site.jsonl"], 3)
        .with("site/a.wav", wav())
        .with("site/a.vtt", Body::Text(VTT.into()))
        .with("site/b.wav", wav())
}

const VTT: &str = "WEBVTT\n\n00:00.100 --> 00:00.900\nbay three\n";

#[allow(clippy::too_many_lines)]
fn cases() -> Vec<Case> {
    let deep = format!(
        r#"{{"id":"a","audio":"a.wav","text":"x","deep":{}{}}}"#,
        "[".repeat(200),
        "]".repeat(200)
    );
    vec![
        // --- manifest fields, through `check` ---
        check_row("start is text", &good_with(r#""start":0.1,"end":0.9"#, r#""start":"abc","end":0.9"#))
            .at("in.jsonl", Some(1), Some("lines[0].start"))
            .says("`start` must be a number of seconds, found the text \"abc\""),
        check_row("start is true", &good_with(r#""start":0.1,"end":0.9"#, r#""start":true,"end":0.9"#))
            .at("in.jsonl", Some(1), Some("lines[0].start"))
            .says("found true"),
        check_row("end is null", &good_with(r#""end":0.9,"text":"bay three""#, r#""end":null,"text":"bay three""#))
            .at("in.jsonl", Some(1), Some("lines[0].end"))
            .says("must be a number of seconds, found null"),
        check_row("end is a list", &good_with(r#""end":0.9,"text":"bay three""#, r#""end":[1],"text":"bay three""#))
            .at("in.jsonl", Some(1), Some("lines[0].end"))
            .says("found a list"),
        check_row("text is a number", &good_with(r#""text":"bay three""#, r#""text":3"#))
            .at("in.jsonl", Some(1), Some("lines[0].text"))
            .says("`text` must be text in double quotes, found the number 3"),
        check_row("id is a number", &good_with(r#""id":"a""#, r#""id":7"#))
            .at("in.jsonl", Some(1), Some("id"))
            .says("`id` must be text in double quotes"),
        check_row("audio missing", &good_with(r#""audio":"a.wav","#, ""))
            .at("in.jsonl", Some(1), Some("audio"))
            .says("`audio` is missing"),
        check_row("id missing", &good_with(r#""id":"a","#, ""))
            .at("in.jsonl", Some(1), Some("id"))
            .says("`id` is missing"),
        check_row("lines is text", r#"{"id":"a","audio":"a.wav","lines":"bay three"}"#)
            .at("in.jsonl", Some(1), Some("lines"))
            .says("`lines` must be a list in square brackets, found the text"),
        check_row("a line is a number", r#"{"id":"a","audio":"a.wav","lines":[7]}"#)
            .at("in.jsonl", Some(1), Some("lines[0]"))
            .says("must be a JSON object with `start`, `end` and `text`"),
        check_row("words is an object", &good_with(r#""words":["#, r#""w":{"#).replace("}]}]}", "}}}]}"))
            .at("in.jsonl", Some(1), Some("lines[0].w"))
            .says("not valid JSON"),
        check_row("word without end", &good_with(r#""start":0.1,"end":0.4,"#, r#""start":0.1,"#))
            .at("in.jsonl", Some(1), Some("lines[0].words[0].end"))
            .says("`end` is missing"),
        check_row("line cut short", &GOOD[..GOOD.len() - 10])
            .at("in.jsonl", Some(1), Some("lines[0].words[1].text"))
            .says("the line ends before the record is complete"),
        check_row("text after the record", &format!("{GOOD} x"))
            .at("in.jsonl", Some(1), None)
            .says("more text after the clip's closing `}`"),
        check_row("unquoted key", &good_with(r#""id":"a""#, r#"id:"a""#))
            .at("in.jsonl", Some(1), None)
            .says("a field name is not in double quotes"),
        check_row("single quotes", &good_with(r#""a.wav""#, "'a.wav'"))
            .at("in.jsonl", Some(1), Some("audio"))
            .says("text goes in double quotes"),
        check_row("NaN time", &good_with(r#""start":0.1,"end":0.9"#, r#""start":NaN,"end":0.9"#))
            .at("in.jsonl", Some(1), Some("lines[0].start"))
            .says("NaN and Infinity are not JSON numbers"),
        check_row("trailing comma", &good_with(r#""speaker":"p1","#, r#""speaker":"p1",,"#))
            .at("in.jsonl", Some(1), Some("lines[0]"))
            .says("not valid JSON at column"),
        check_row("missing comma", &good_with(r#""id":"a","#, r#""id":"a" "#))
            .at("in.jsonl", Some(1), None)
            .says("a `,` between fields or the closing `}` is missing"),
        check_row("a list, not a clip", "[\"a\", \"a.wav\"]\n")
            .at("in.jsonl", Some(1), None)
            .says("a clip must be a JSON object `{...}`, found a list"),
        check_row("a bare number", "42\n")
            .at("in.jsonl", Some(1), None)
            .says("a clip must be a JSON object `{...}`, found a number"),
        check_row("blank line between clips", &format!("{GOOD}\n\n{}\n", GOOD.replace(r#""id":"a""#, r#""id":"b""#)))
            .at("in.jsonl", Some(2), None)
            .says("empty line (one clip per line, no blank lines)"),
        check_row("whitespace line", &format!("{GOOD}\n   \t\n"))
            .at("in.jsonl", Some(2), None)
            .says("empty line"),
        case("byte 0xFF on line 2", &CHECK, 3)
            .with("in.jsonl", Body::Bytes([GOOD.as_bytes(), b"\n{\"id\":\"b\xff\"}\n"].concat()))
            .at("in.jsonl", Some(2), None)
            .says("not UTF-8 text: byte 0xFF at column 9"),
        case("Latin-1 text on line 1", &CHECK, 3)
            .with("in.jsonl", Body::Bytes(good_with("bay three", "cafX").replace('X', "\u{1}").into_bytes().into_iter().map(|b| if b == 1 { 0xE9 } else { b }).collect()))
            .at("in.jsonl", Some(1), None)
            .says("not UTF-8"),
        case("byte-order mark accepted", &CHECK, 0)
            .with("in.jsonl", Body::Bytes([b"\xEF\xBB\xBF".as_slice(), GOOD.as_bytes(), b"\n"].concat()))
            .says("no problems"),
        check_row("duplicate id", &format!("{GOOD}\n{GOOD}\n"))
            .at("in.jsonl", Some(2), Some("id"))
            .says("`a` already used on line 1"),
        check_row("negative start", &good_with(r#""start":0.1,"end":0.9"#, r#""start":-0.5,"end":0.9"#))
            .at("in.jsonl", Some(1), Some("lines[0].start"))
            .says("-0.5 s is negative"),
        check_row("end before start", &good_with(r#""start":0.1,"end":0.9"#, r#""start":0.8,"end":0.7"#))
            .at("in.jsonl", Some(1), Some("lines[0].end"))
            .says("end 0.7 s is before start 0.8 s"),
        check_row("words out of order", &good_with(r#""start":0.5,"end":0.9,"text":"three""#, r#""start":0.05,"end":0.09,"text":"three""#))
            .at("in.jsonl", Some(1), Some("lines[0].words[1].start"))
            .says("words must be in order"),
        check_row("label past the audio", &good_with(r#""end":0.9,"text":"bay three""#, r#""end":1.5,"text":"bay three""#))
            .at("in.jsonl", Some(1), Some("lines[0].end"))
            .says("1.5 s is past the end of the audio a.wav (1.0000 s)"),
        check_row("audio file missing", &good_with("a.wav", "gone.wav"))
            .at("in.jsonl", Some(1), Some("audio"))
            .says("gone.wav"),
        check_row("audio is a folder", &good_with("a.wav", "sub"))
            .with("sub", Body::Dir)
            .at("in.jsonl", Some(1), Some("audio"))
            .says("is a folder, not a regular file"),
        check_row("audio is a FIFO", &good_with("a.wav", "pipe.wav"))
            .with("pipe.wav", Body::Fifo)
            .at("in.jsonl", Some(1), Some("audio"))
            .says("pipe.wav: is a FIFO (named pipe), not a regular file"),
        check_row("audio is text", &good_with("a.wav", "notes.wav"))
            .with("notes.wav", Body::Text("not audio at all\n".into()))
            .at("in.jsonl", Some(1), Some("audio"))
            .says("notes.wav: cannot decode: not an audio format retake reads"),
        check_row("audio file of 0 bytes", &good_with("a.wav", "zero.wav"))
            .with("zero.wav", Body::Bytes(Vec::new()))
            .at("in.jsonl", Some(1), Some("audio"))
            .says("zero.wav: cannot decode"),
        check_row("audio truncated", &good_with("a.wav", "cut.wav"))
            .with("cut.wav", Body::Cut { rate: 16_000, samples: tone(16_000, 1.0), keep: 20_000 })
            .at("in.jsonl", Some(1), Some("audio"))
            .says("cut.wav: truncated: header declares 16000 frames"),
        run_row("run: audio truncated", &good_with("a.wav", "cut.wav"))
            .with("cut.wav", Body::Cut { rate: 16_000, samples: tone(16_000, 1.0), keep: 20_000 })
            .at("cut.wav", Some(1), Some("audio"))
            .says("truncated"),
        check_row("audio holds NaN", &good_with("a.wav", "nan.wav"))
            .with("nan.wav", Body::Float { rate: 16_000, samples: with_sample(tone(16_000, 1.0), 1234, f32::NAN) })
            .at("in.jsonl", Some(1), Some("audio"))
            .says("nan.wav: sample 1234 (at 0.077125 s) is not finite"),
        check_row("audio has no samples", r#"{"id":"a","audio":"e.wav","text":"x"}"#)
            .with("e.wav", Body::Pcm16 { rate: 16_000, samples: Vec::new() })
            .at("in.jsonl", Some(1), Some("audio"))
            .says("e.wav: no samples"),
        check_row("duration disagrees", &good_with(r#""id":"a","#, r#""id":"a","duration":2.5,"#))
            .at("in.jsonl", Some(1), Some("duration"))
            .says("2.5 s, but the audio lasts 1.0000 s"),
        check_row("duration is text", &good_with(r#""id":"a","#, r#""id":"a","duration":"1 s","#))
            .at("in.jsonl", Some(1), Some("duration"))
            .says("`duration` must be a number of seconds, found the text \"1 s\""),
        check_row("origin is a number", &good_with(r#""id":"a","#, r#""id":"a","origin":5,"#))
            .at("in.jsonl", Some(1), Some("origin"))
            .says("`origin` must be a JSON object (a take's origin), found the number 5"),
        check_row(
            "time map of one knot",
            &good_with(r#""id":"a","#, r#""id":"a","origin":{"source":"s","take":0,"seed":1,"source_rate":16000,"steps":[],"time_map":[[0,0]]},"#),
        )
        .at("in.jsonl", Some(1), Some("origin.time_map"))
        .says("a time map needs at least two knots"),
        check_row("take index negative", &good_with(r#""id":"a","#, r#""id":"a","origin":{"source":"s","take":-1,"seed":1,"source_rate":16000,"steps":[],"time_map":[[0,0],[1,1]]},"#))
            .at("in.jsonl", Some(1), Some("origin.take"))
            .says("`take` must be a whole number from 0, found the number -1"),
        check_row("number too large", &good_with(r#""start":0.1,"end":0.9"#, r#""start":1e999,"end":0.9"#))
            .at("in.jsonl", Some(1), Some("lines[0].start"))
            .says("a number is too large"),
        check_row("raw tab in text", &good_with("bay three", "bay\tthree"))
            .at("in.jsonl", Some(1), Some("lines[0].text"))
            .says("raw control character"),
        check_row("unknown escape", &good_with("bay three", "bay\\qthree"))
            .at("in.jsonl", Some(1), Some("lines[0].text"))
            .says("an escape JSON does not know"),
        check_row("lone surrogate", &good_with("bay three", "bay\\ud800"))
            .at("in.jsonl", Some(1), Some("lines[0].text"))
            .says("not a valid character"),
        check_row("nested too deeply", &deep)
            .at("in.jsonl", Some(1), None)
            .says("nested too deeply"),
        check_row("speaker is a number", &good_with(r#""speaker":"p1""#, r#""speaker":1"#))
            .at("in.jsonl", Some(1), Some("lines[0].speaker"))
            .says("`speaker` must be text in double quotes"),
        check_row("neither lines nor text", r#"{"id":"a","audio":"a.wav"}"#)
            .at("in.jsonl", Some(1), None)
            .says("needs `lines` (timed) or `text` (untimed)"),
        check_row("good line then bad line", &format!("{GOOD}\n{{\"id\":\"b\",\"audio\":5}}\n"))
            .at("in.jsonl", Some(2), Some("audio"))
            .says("`audio` must be text in double quotes, found the number 5"),
        // --- the wrong kind of file as a manifest ---
        case("recipe given as the manifest", &["check", "{d}/recipe.toml"], 1)
            .at("recipe.toml", None, None)
            .says("not a JSON Lines manifest: it is a TOML file"),
        case("TOML inside a .jsonl", &CHECK, 1).manifest(RECIPE)
            .at("in.jsonl", None, None)
            .says("it is a TOML file (a recipe?)"),
        case("one JSON document over lines", &CHECK, 1).manifest("{\n  \"id\": \"a\",\n  \"audio\": \"a.wav\",\n  \"text\": \"x\"\n}\n")
            .at("in.jsonl", None, None)
            .says("one JSON document over several lines"),
        case("manifest missing", &["check", "{d}/nothing.jsonl"], 1)
            .at("nothing.jsonl", None, None)
            .says("cannot read manifest"),
        case("manifest is a folder", &["check", "{d}/sub"], 1)
            .with("sub", Body::Dir)
            .at("sub", None, None)
            .says("is a folder, not a regular file"),
        case("manifest is a FIFO", &["check", "{d}/pipe.jsonl"], 1)
            .with("pipe.jsonl", Body::Fifo)
            .at("pipe.jsonl", None, None)
            .says("is a FIFO (named pipe)"),
        // --- `run`: rejects in rejects.jsonl, the run goes on ---
        run_row("run: NaN sample", &good_with("a.wav", "nan.wav"))
            .with("nan.wav", Body::Float { rate: 16_000, samples: with_sample(tone(16_000, 1.0), 1234, f32::NAN) })
            .at("nan.wav", Some(1), Some("audio"))
            .says("sample 1234 (at 0.077125 s) is not finite"),
        run_row("run: +Inf at another rate", &good_with("a.wav", "inf.wav"))
            .with("inf.wav", Body::Float { rate: 44_100, samples: with_sample(tone(44_100, 1.0), 4410, f32::INFINITY) })
            .at("inf.wav", Some(1), Some("audio"))
            .says("sample 4410 (at 0.100000 s) is not finite"),
        run_row("run: one frame at 48 kHz", r#"{"id":"a","audio":"one.wav","text":"x"}"#)
            .with("one.wav", Body::Float { rate: 48_000, samples: vec![0.5] })
            .at("one.wav", Some(1), Some("audio"))
            .says("1 frame at 48000 Hz is less than one sample at 16000 Hz"),
        run_row("run: no samples", r#"{"id":"a","audio":"e.wav","text":"x"}"#)
            .with("e.wav", Body::Float { rate: 16_000, samples: Vec::new() })
            .at("e.wav", Some(1), Some("audio"))
            .says("no samples"),
        run_row("run: FIFO audio", &good_with("a.wav", "pipe.wav"))
            .with("pipe.wav", Body::Fifo)
            .at("pipe.wav", Some(1), Some("audio"))
            .says("is a FIFO (named pipe), not a regular file"),
        case("run: bad byte keeps the good line", &RUN, 3)
            .with("in.jsonl", Body::Bytes([GOOD.as_bytes(), b"\n{\"id\":\"\xc3(\"}\n"].concat()))
            .at("rejects.jsonl", Some(2), None)
            .says("not UTF-8 text: byte 0xC3 at column 8")
            .says("made    1 take,"),
        case("run: byte-order mark", &RUN, 0)
            .with("in.jsonl", Body::Bytes([b"\xEF\xBB\xBF".as_slice(), GOOD.as_bytes(), b"\n"].concat()))
            .says("made    1 take,"),
        case("run: recipe as --input", &["run", "{d}/recipe.toml", "-i", "{d}/recipe.toml", "-o", "{d}/out"], 1)
            .at("recipe.toml", None, None)
            .says("it is a TOML file (a recipe?)"),
        run_row("run: label past the audio", &good_with(r#""end":0.9,"text":"bay three""#, r#""end":1.5,"text":"bay three""#))
            .at("a.wav", Some(1), Some("lines[0].end"))
            .says("past the end of the audio"),
        run_row("run: start is text", &good_with(r#""start":0.1,"end":0.9"#, r#""start":"abc","end":0.9"#))
            .at("rejects.jsonl", Some(1), Some("lines[0].start"))
            .says("must be a number of seconds, found the text"),
        case("run: manifest missing", &["run", "{d}/recipe.toml", "-i", "{d}/gone.jsonl", "-o", "{d}/out"], 1)
            .at("gone.jsonl", None, None)
            .says("cannot read manifest"),
        case("slice: bad byte is one reject", &[SLICE, "{d}/in.jsonl", "-o", "{d}/sliced"], 3)
            .with("in.jsonl", Body::Bytes([GOOD.as_bytes(), b"\n\xff\n"].concat()))
            .at("in.jsonl", Some(2), None)
            .says("not UTF-8"),
        // --- recipes ---
        recipe_row("recipe: unknown top key", "takes = 1\nsped = 2\n")
            .at("recipe.toml", Some(2), Some("sped"))
            .says("unknown key `sped`"),
        recipe_row("recipe: TOML syntax", "takes = 1\n[[step]\ndo = \"gain\"\n")
            .at("recipe.toml", Some(2), None),
        recipe_row("recipe: takes = 0", "takes = 0\n")
            .at("recipe.toml", Some(1), Some("takes")),
        recipe_row("recipe: unknown step", "takes = 1\n[[step]]\ndo = \"reverse\"\n")
            .at("recipe.toml", Some(3), Some("reverse")),
        recipe_row("recipe: gain without db", "takes = 1\n[[step]]\ndo = \"gain\"\n")
            .at("recipe.toml", Some(2), Some("db")),
        recipe_row("recipe: speed out of range", "takes = 1\n[[step]]\ndo = \"speed\"\nfactor = 5.0\n")
            .at("recipe.toml", Some(4), Some("factor")),
        recipe_row("recipe: mask window 1e12", "takes = 1\n[[step]]\ndo = \"mask\"\nfreq_masks = 1\nwindow = 1e12\n")
            .at("recipe.toml", Some(5), Some("window"))
            .says("outside [16, 65536] samples"),
        recipe_row("recipe: mask window negative", "takes = 1\n[[step]]\ndo = \"mask\"\n\nwindow = -400\n")
            .at("recipe.toml", Some(5), Some("window"))
            .says("-400 is outside"),
        recipe_row("recipe: mask window not whole", "takes = 1\n[[step]]\ndo = \"mask\"\nwindow = 400.5\n")
            .at("recipe.toml", Some(4), Some("window"))
            .says("not a whole number"),
        recipe_row("recipe: mask hop too large", "takes = 1\n[[step]]\ndo = \"mask\"\nhop = 1e9\n")
            .at("recipe.toml", Some(4), Some("hop")),
        recipe_row("recipe: mask time width huge", "takes = 1\n[[step]]\ndo = \"mask\"\ntime_masks = 1\ntime_width_s = 1e9\n")
            .at("recipe.toml", Some(5), Some("time_width_s")),
        recipe_row("recipe: misspelt required key", "takes = 1\n[[step]]\ndo = \"speed\"\nfactr = 1.1\n")
            .at("recipe.toml", Some(4), Some("unknown key `factr`"))
            .says("did you mean `factor`"),
        recipe_row("recipe: misspelt optional key", "takes = 1\n[[step]]\ndo = \"gain\"\ndb = 1.0\nceilng_db = -1.0\n")
            .at("recipe.toml", Some(5), Some("unknown key `ceilng_db`"))
            .says("did you mean `ceiling_db`")
            .says("this step reads: db, ceiling_db, do, chance"),
        recipe_row("recipe: duplicate key", "takes = 1\n[[step]]\ndo = \"gain\"\ndb = 1.0\ndb = 2.0\n")
            .at("recipe.toml", Some(5), Some("duplicate key `db`")),
        case("cli: -j 0", &["run", "{d}/recipe.toml", "-i", "{d}/in.jsonl", "-o", "{d}/out", "-j", "0"], 2)
            .manifest(&(GOOD.to_string() + "\n"))
            .with("recipe.toml", Body::Text(RECIPE.to_string()))
            .says("from 1 to 1024")
            .absent("out"),
        case("cli: -j 100000", &["run", "{d}/recipe.toml", "-i", "{d}/in.jsonl", "-o", "{d}/out", "-j", "100000"], 2)
            .manifest(&(GOOD.to_string() + "\n"))
            .with("recipe.toml", Body::Text(RECIPE.to_string()))
            .says("from 1 to 1024"),
        recipe_row("recipe: manifest given as recipe", &(GOOD.to_string() + "\n"))
            .at("recipe.toml", Some(1), None),
        case("recipe: missing", &["run", "{d}/none.toml", "-i", "{d}/in.jsonl", "-o", "{d}/out"], 2)
            .manifest(GOOD)
            .at("none.toml", None, None)
            .says("cannot read"),
        case("recipe: a FIFO", &["run", "{d}/pipe.toml", "-i", "{d}/in.jsonl", "-o", "{d}/out"], 2)
            .manifest(GOOD)
            .with("pipe.toml", Body::Fifo)
            .at("pipe.toml", None, None)
            .says("is a FIFO (named pipe), not a regular file"),
        case("recipe: a folder", &["run", "{d}/sub", "-i", "{d}/in.jsonl", "-o", "{d}/out"], 2)
            .manifest(GOOD)
            .with("sub", Body::Dir)
            .at("sub", None, None)
            .says("is a folder, not a regular file"),
        case("manifest with CRLF line ends accepted", &CHECK, 0)
            .manifest(&format!("{GOOD}\r\n{}\r\n", GOOD.replace(r#""id":"a""#, r#""id":"b""#)))
            .says("2 clips"),
        case("manifest without a final line break accepted", &CHECK, 0)
            .manifest(GOOD)
            .says("1 clips"),
        // --- import: WebVTT, TSV and audio beside them ---
        case("import: folder missing", &["import", "{d}/nowhere"], 2)
            .at("nowhere", None, None)
            .says("the folder does not exist")
            .absent("nowhere"),
        import_row("import: FIFO audio")
            .with("site/p.wav", Body::Fifo)
            .with("site/p.vtt", Body::Text(VTT.into()))
            .at("p.wav", None, None)
            .says("is a FIFO (named pipe), not a regular file"),
        import_row("import: WebVTT not UTF-8")
            .with("site/b.vtt", Body::Bytes(b"WEBVTT\n\n00:00.100 --> 00:00.900\nbay \xe9\n".to_vec()))
            .at("b.vtt", Some(4), None)
            .says("not UTF-8 text: byte 0xE9 at column 5"),
        import_row("import: WebVTT without header")
            .with("site/b.vtt", Body::Text("00:00.100 --> 00:00.900\nbay\n".into()))
            .at("b.vtt", Some(1), None),
        import_row("import: WebVTT bad timestamp")
            .with("site/b.vtt", Body::Text("WEBVTT\n\n00:00.100 --> 00:0x.900\nbay\n".into()))
            .at("b.vtt", Some(3), Some("end time")),
        import_row("import: WebVTT cue past the audio")
            .with("site/b.vtt", Body::Text("WEBVTT\n\n00:00.100 --> 00:05.000\nbay\n".into()))
            .at("b.vtt", Some(3), Some("end"))
            .says("past the end of its audio b.wav"),
        import_row("import: WebVTT with BOM accepted")
            .with("site/a.vtt", Body::Bytes([b"\xEF\xBB\xBF".as_slice(), VTT.as_bytes()].concat()))
            .with("site/b.txt", Body::Text(String::new()))
            .at("b.txt", None, None)
            .says("imported 1 clip"),
        import_row("import: TSV time is text")
            .with("site/b.tsv", Body::Text("0.1\t0.4\tbay\nsoon\t0.9\tthree\n".into()))
            .at("b.tsv", Some(2), Some("start")),
        import_row("import: TSV with two columns")
            .with("site/b.tsv", Body::Text("0.1\t0.4\n".into()))
            .at("b.tsv", Some(1), None),
        import_row("import: TSV row past the audio")
            .with("site/b.tsv", Body::Text("0.1\t0.4\tbay\n0.5\t3.5\tthree\n".into()))
            .at("b.tsv", Some(2), Some("end"))
            .says("past the end of its audio b.wav"),
        import_row("import: TSV not UTF-8")
            .with("site/b.tsv", Body::Bytes(b"0.1\t0.4\tbay\n0.5\t0.9\tthr\xffee\n".to_vec()))
            .at("b.tsv", Some(2), None)
            .says("not UTF-8 text: byte 0xFF at column 12"),
        import_row("import: NaN audio")
            .with("site/b.wav", Body::Float { rate: 16_000, samples: with_sample(tone(16_000, 1.0), 10, f32::NAN) })
            .with("site/b.vtt", Body::Text(VTT.into()))
            .at("b.wav", None, None)
            .says("sample 10 (at 0.000625 s) is not finite"),
        // --- remap: annotation files stay inside the labels folder ---
        case("remap: source id climbs out", &["remap", "{d}/takes.jsonl", "{d}/labels", "-o", "{d}/moved"], 3)
            .with("takes.jsonl", Body::Text(take_line("../secret")))
            .with("labels/x.tsv", Body::Text("0.1\t0.2\tx\n".into()))
            .with("secret.tsv", Body::Text("0.1\t0.2\tsecret\n".into()))
            .at("takes.jsonl", Some(1), Some("origin.source"))
            .says("source id `../secret` cannot name an annotation file")
            .absent("moved/t.tsv"),
        case("remap: absolute source id", &["remap", "{d}/takes.jsonl", "{d}/labels", "-o", "{d}/moved"], 3)
            .with("takes.jsonl", Body::Text(take_line("/etc/hostname")))
            .with("labels/x.tsv", Body::Text("0.1\t0.2\tx\n".into()))
            .at("takes.jsonl", Some(1), Some("origin.source"))
            .says("no leading `/`")
            .absent("moved/t.tsv"),
        case("remap: bad WebVTT label", &["remap", "{d}/takes.jsonl", "{d}/labels", "-o", "{d}/moved"], 3)
            .with("takes.jsonl", Body::Text(take_line("s")))
            .with("labels/s.vtt", Body::Text("WEBVTT\n\n00:00.500 --> 00:00.100\nx\n".into()))
            .at("s.vtt", Some(3), None),
        case("remap: bad TSV label", &["remap", "{d}/takes.jsonl", "{d}/labels", "-o", "{d}/moved"], 3)
            .with("takes.jsonl", Body::Text(take_line("s")))
            .with("labels/s.tsv", Body::Text("0.1\t0.2\tx\n0.3\n".into()))
            .at("s.tsv", Some(2), None),
        case("remap: manifest line not a take", &["remap", "{d}/in.jsonl", "{d}/labels", "-o", "{d}/moved"], 3)
            .manifest(GOOD)
            .with("labels", Body::Dir)
            .at("in.jsonl", Some(1), Some("origin"))
            .says("is not a take"),
        // --- export: writes only beside audio that exists inside the manifest's folder ---
        case("export: audio missing", &["export", "{d}/in.jsonl"], 3)
            .manifest(&good_with("a.wav", "gone/x.wav"))
            .at("in.jsonl", Some(1), None)
            .says("does not exist, so there is nothing to write beside")
            .absent("gone"),
        case("export: audio outside the manifest's folder", &["export", "{d}/m/in.jsonl"], 3)
            .with("m/in.jsonl", Body::Text(good_with("a.wav", "../a.wav")))
            .at("in.jsonl", Some(1), None)
            .says("lies outside the manifest's folder")
            .absent("a.vtt"),
        // --- the command line ---
        case("cli: run without --input", &["run", "{d}/recipe.toml", "-o", "{d}/out"], 2)
            .says("--input"),
        case("cli: unknown command", &["sprinkle"], 2).says("sprinkle"),
        case("cli: check without a manifest", &["check"], 2).says("<MANIFEST>"),
        case("cli: export to an unknown format", &["export", "{d}/in.jsonl", "--to", "srt"], 2)
            .says("`srt`: expected `vtt` or `tsv`"),
        case("cli: held-out above 1", &["bank", "{d}", "--held-out", "2"], 2)
            .says("expected a fraction from 0 to 1"),
        case("cli: channel is not a number", &["run", "{d}/recipe.toml", "-i", "{d}/in.jsonl", "-o", "{d}/out", "--channels", "left"], 2)
            .says("expected `mix` or a channel number"),
    ]
}

/// A take record whose origin names `source`.
fn take_line(source: &str) -> String {
    format!(
        r#"{{"id":"t","audio":"t.wav","text":"x","duration":1.0,"origin":{{"source":"{source}","take":0,"seed":1,"source_rate":16000,"steps":[],"time_map":[[0.0,0.0],[1.0,1.0]]}}}}"#
    ) + "\n"
}

fn put(dir: &Path, rel: &str, body: &Body) {
    let path = dir.join(rel);
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent).unwrap();
    }
    let _ = std::fs::remove_file(&path);
    match body {
        Body::Text(t) => std::fs::write(&path, t).unwrap(),
        Body::Bytes(b) => std::fs::write(&path, b).unwrap(),
        Body::Pcm16 { rate, samples } => common::write_wav_pcm16(&path, *rate, samples),
        Body::Float { rate, samples } => common::write_wav_float(&path, *rate, samples),
        Body::Dir => std::fs::create_dir_all(&path).unwrap(),
        Body::Cut {
            rate,
            samples,
            keep,
        } => {
            common::write_wav_pcm16(&path, *rate, samples);
            let bytes = std::fs::read(&path).unwrap();
            std::fs::write(&path, &bytes[..*keep]).unwrap();
        }
        Body::Fifo => {
            let ok = Command::new("mkfifo").arg(&path).status().unwrap();
            assert!(ok.success(), "mkfifo {}", path.display());
        }
    }
}

/// Run the binary; a run still going after `limit` is killed and reported as a hang.
fn run_bounded(args: &[String], limit: Duration) -> Result<(i32, String), String> {
    let mut child = Command::new(env!("CARGO_BIN_EXE_retake"))
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let started = Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            let out = child.wait_with_output().unwrap();
            let text = String::from_utf8_lossy(&out.stdout).to_string()
                + &String::from_utf8_lossy(&out.stderr);
            return Ok((status.code().unwrap_or(-1), text));
        }
        if started.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            return Err(format!("still running after {limit:?}: a hang"));
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// Run one case; `Err` says what was wrong. `Ok(true)` when its message names the file,
/// the line and the field.
fn try_case(c: &Case) -> Result<bool, String> {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    put(
        d,
        "a.wav",
        &Body::Pcm16 {
            rate: 16_000,
            samples: tone(16_000, 1.0),
        },
    );
    put(d, "recipe.toml", &Body::Text(RECIPE.into()));
    for (rel, body) in &c.files {
        put(d, rel, body);
    }
    let dir = d.display().to_string();
    let args: Vec<String> = c.args.iter().map(|a| a.replace("{d}", &dir)).collect();
    let (code, mut text) = run_bounded(&args, Duration::from_secs(30))?;
    for folder in ["out", "sliced"] {
        if let Ok(rejects) = std::fs::read_to_string(d.join(folder).join("rejects.jsonl")) {
            text.push_str("\nrejects.jsonl:\n");
            text.push_str(&rejects);
        }
    }
    if std::env::var_os("BAD_INPUTS_SHOW").is_some() {
        eprintln!("== {} (exit {code})\n{}", c.name, text.replace(&dir, "{d}"));
    }
    let mut wrong = Vec::new();
    if code != c.code {
        wrong.push(format!("exit {code}, expected {}", c.code));
    }
    for phrase in PARSER_PHRASES {
        if text.contains(phrase) {
            wrong.push(format!("says parser phrasing {phrase:?}"));
        }
    }
    let has_line = |n: usize| {
        text.contains(&format!("line {n}:"))
            || text.contains(&format!("line {n} "))
            || text.contains(&format!("\"line\":{n},"))
    };
    if let Some(f) = c.file
        && !text.contains(f)
    {
        wrong.push(format!("does not name the file {f}"));
    }
    if let Some(n) = c.line
        && !has_line(n)
    {
        wrong.push(format!("does not name line {n}"));
    }
    if let Some(f) = c.field
        && !text.contains(f)
    {
        wrong.push(format!("does not name the field {f}"));
    }
    for s in &c.says {
        if !text.contains(&s.replace("{d}", &dir)) {
            wrong.push(format!("does not say {s:?}"));
        }
    }
    for a in &c.absent {
        if d.join(a).exists() {
            wrong.push(format!("{a} exists"));
        }
    }
    if wrong.is_empty() {
        Ok(c.file.is_some() && c.line.is_some() && c.field.is_some())
    } else {
        Err(format!("{}\n--- output:\n{text}", wrong.join("; ")))
    }
}

#[test]
fn every_bad_input_gets_a_clear_message() {
    let cases = cases();
    let mut names = std::collections::HashSet::new();
    for c in &cases {
        assert!(names.insert(c.name), "two rows named {:?}", c.name);
    }
    let mut failures = Vec::new();
    let mut located = 0;
    for c in &cases {
        match try_case(c) {
            Ok(full) => located += usize::from(full),
            Err(e) => failures.push(format!("== {}: {e}", c.name)),
        }
    }
    eprintln!(
        "{} bad inputs, {located} with a message naming file, line and field",
        cases.len()
    );
    assert!(
        failures.is_empty(),
        "{} of {} rows failed:\n{}",
        failures.len(),
        cases.len(),
        failures.join("\n")
    );
}
