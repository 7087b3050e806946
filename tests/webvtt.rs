//! WebVTT reading and writing checked against the outside world: the W3C specification's own
//! examples (taken verbatim from "WebVTT: The Web Video Text Tracks Format",
//! https://www.w3.org/TR/webvtt1/, as in its source w3c/webvtt index.bs, with the HTML
//! escapes of that source rendered: `&lt;` as `<`, `&mdash;` as `—`, `&trade;` as `™`),
//! webvtt-py 0.5.1 (PyPI) reading what `write_lines` writes, Python's `decimal` rounding the
//! exact binary value of each time, and round-trip properties.

mod common;

use std::path::Path;

use proptest::prelude::*;
use retake::transcript::Line;
use retake::transcript::webvtt::{
    Block, Document, cue_text, format_timestamp, parse, read_lines, read_transcript, write_lines,
};
use serde_json::{Map, Value};

// ---------------------------------------------------------------------------------------
// Examples from the specification, verbatim; the section (and its anchor) beside each.

/// §1.1 "A simple caption file" (#introduction-caption).
const SIMPLE_CAPTION: &str = "WEBVTT

00:11.000 --> 00:13.000
<v Roger Bingham>We are in New York City

00:13.000 --> 00:16.000
<v Roger Bingham>We're actually at the Lucern Hotel, just down the street

00:16.000 --> 00:18.000
<v Roger Bingham>from the American Museum of Natural History

00:18.000 --> 00:20.000
<v Roger Bingham>And with me is Neil deGrasse Tyson

00:20.000 --> 00:22.000
<v Roger Bingham>Astrophysicist, Director of the Hayden Planetarium

00:22.000 --> 00:24.000
<v Roger Bingham>at the AMNH.

00:24.000 --> 00:26.000
<v Roger Bingham>Thank you for walking down here.

00:27.000 --> 00:30.000
<v Roger Bingham>And I want to do a follow-up on the last conversation we did.

00:30.000 --> 00:31.500 align:right size:50%
<v Roger Bingham>When we e-mailed—

00:30.500 --> 00:32.500 align:left size:50%
<v Neil deGrasse Tyson>Didn't we talk about enough in that conversation?

00:32.000 --> 00:35.500 align:right size:50%
<v Roger Bingham>No! No no no no; 'cos 'cos obviously 'cos

00:32.500 --> 00:33.500 align:left size:50%
<v Neil deGrasse Tyson><i>Laughs</i>

00:35.500 --> 00:38.000
<v Roger Bingham>You know I'm so excited my glasses are falling off here.
";

/// §1.2 "Caption cues with multiple lines" (#introduction-multiple-lines).
const MULTIPLE_LINES: &str = "WEBVTT

00:01.000 --> 00:04.000
Never drink liquid nitrogen.

00:05.000 --> 00:09.000
— It will perforate your stomach.
— You could die.

00:10.000 --> 00:14.000
The Organisation for Sample Public Service Announcements accepts no liability for the content of this advertisement, or for the consequences of any actions taken on the basis of the information provided.
";

/// §1.3 "Styling captions" (#styling).
const STYLES: &str = "WEBVTT

STYLE
::cue {
  background-image: linear-gradient(to bottom, dimgray, lightgray);
  color: papayawhip;
}
/* Style blocks cannot use blank lines nor \"dash dash greater than\" */

NOTE comment blocks can be used between style blocks.

STYLE
::cue(b) {
  color: peachpuff;
}

hello
00:00:00.000 --> 00:00:10.000
Hello <b>world</b>.

NOTE style blocks cannot appear after the first cue.
";

/// §1.4 "Other caption and subtitling features" (#introduction-other-features): identifiers.
const IDENTIFIERS: &str = "WEBVTT

test
00:00.000 --> 00:02.000
This is a test.

123
00:00.000 --> 00:02.000
That's an, an, that's an L!

crédit de transcription
00:04.000 --> 00:05.000
Transcrit par Célestes™
";

/// §1.4, classes and a language span.
const CLASS_AND_LANG: &str = "WEBVTT

04:02.500 --> 04:05.000
J'ai commencé le basket à l'âge de 13, 14 ans

04:05.001 --> 04:07.800
Sur les <i.foreignphrase><lang en>playground</lang></i>, ici à Montpellier
";

/// §1.4, voice spans.
const VOICES: &str = "WEBVTT

00:00.000 --> 00:02.000
<v.first.loud Esme>It's a blue apple tree!

00:02.000 --> 00:04.000
<v Mary>No way!

00:04.000 --> 00:06.000
<v Esme>Hee!</v> <i>laughter</i>

00:06.000 --> 00:08.000
<v.loud Mary>That's awesome!
";

/// §1.4, cue positions.
const POSITIONS: &str = "WEBVTT

00:00:00.000 --> 00:00:04.000 position:10%,line-left align:left size:35%
Where did he go?

00:00:03.000 --> 00:00:06.500 position:90% align:right size:35%
I think he went down this lane.

00:00:04.000 --> 00:00:06.500 position:45%,line-right align:center size:35%
What are you waiting for?
";

/// §1.4, regions.
const REGIONS: &str = "WEBVTT

REGION
id:fred
width:40%
lines:3
regionanchor:0%,100%
viewportanchor:10%,90%
scroll:up

REGION
id:bill
width:40%
lines:3
regionanchor:100%,100%
viewportanchor:90%,90%
scroll:up

00:00:00.000 --> 00:00:20.000 region:fred align:left
<v Fred>Hi, my name is Fred

00:00:02.500 --> 00:00:22.500 region:bill align:right
<v Bill>Hi, I'm Bill

00:00:05.000 --> 00:00:25.000 region:fred align:left
<v Fred>Would you like to get a coffee?

00:00:07.500 --> 00:00:27.500 region:bill align:right
<v Bill>Sure! I've only had one today.

00:00:10.000 --> 00:00:30.000 region:fred align:left
<v Fred>This is my fourth!

00:00:12.500 --> 00:00:32.500 region:fred align:left
<v Fred>OK, let's go.
";

/// §1.5 "Comments in WebVTT" (#introduction-comments), the second example.
const COMMENTS: &str = "WEBVTT

NOTE
This file was written by Jill. I hope
you enjoy reading it. Some things to
bear in mind:
- I was lip-reading, so the cues may
not be 100% accurate
- I didn't pay too close attention to
when the cues should start or end.

00:01.000 --> 00:04.000
Never drink liquid nitrogen.

NOTE check next cue

00:05.000 --> 00:09.000
— It will perforate your stomach.
— You could die.

NOTE end of file
";

/// §1.6 "Chapters example" (#introduction-chapters).
const CHAPTERS: &str = "WEBVTT

NOTE
This is from a talk Silvia gave about WebVTT.

Slide 1
00:00:00.000 --> 00:00:10.700
Title Slide

Slide 2
00:00:10.700 --> 00:00:47.600
Introduction by Naomi Black

Slide 3
00:00:47.600 --> 00:01:50.100
Impact of Captions on the Web

Slide 4
00:01:50.100 --> 00:03:33.000
Requirements of a Video text format
";

/// §4.4 "WebVTT file using only nested cues" (#file-using-only-nested-cues), both examples.
const NESTED: &str = "WEBVTT

00:00.000 --> 01:24.000
Introduction

00:00.000 --> 00:44.000
Topics

00:44.000 --> 01:19.000
Presenters

01:24.000 --> 05:00.000
Scrolling Effects

01:35.000 --> 03:00.000
Achim's Demo

03:00.000 --> 05:00.000
Timeline Panel
";
const NOT_NESTED: &str = "WEBVTT

00:00.000 --> 01:00.000
The First Minute

00:30.000 --> 01:30.000
The Final Minute
";

/// §5 "Default classes" (#default-classes), the example of both color classes.
const DEFAULT_CLASSES: &str = "WEBVTT

02:00.000 --> 02:05.000
<c.yellow.bg_blue>This is yellow text on a blue background</c>

04:00.000 --> 04:05.000
<c.yellow.bg_blue.magenta.bg_black>This is magenta text on a black background</c>
";

/// §8.1 "CSS extensions, Introduction" (#example-cue-selector): the type selector example.
const EVERY_TAG: &str = "WEBVTT

00:00:00.000 --> 00:00:08.000
<c>Yellow!</c>
<i>Yellow!</i>
<u>Yellow!</u>
<b>Yellow!</b>
<u>Yellow!</u>
<ruby>Yellow! <rt>Yellow!</rt></ruby>
<v Kathryn>Yellow!</v>
<lang en>Yellow!</lang>
";

/// §8.1 (#example-cue-selector): the `:past` and `:future` example, with inline timestamps.
const PAST_FUTURE: &str = "WEBVTT

00:00:00.000 --> 00:00:08.000
<c>No match (no timestamps)</c>

00:00:08.000 --> 00:00:16.000
No match <00:00:12.000> (no elements)

00:00:16.000 --> 00:00:24.000
<00:00:16.000> <c>This</c>
<00:00:18.000> <c>can</c>
<00:00:20.000> <c>match</c>
<00:00:22.000> <c>:past/:future</c>
<00:00:24.000>
";

/// §8.1 (#example-cue-selector): the `::cue-region` example.
const CUE_REGION: &str = "WEBVTT

REGION
id:editor-comments
regionanchor:0%,0%
viewportanchor:0%,0%

00:00:00.000 --> 00:00:08.000
No match (normal cue)

00:00:08.000 --> 00:00:16.000 region:editor-comments
Yellow!
";

/// §7.3 "Obtaining CSS boxes" (#obtaining-css-boxes): the cascade example's track.
const CASCADE: &str = "WEBVTT

STYLE
::cue { color:lime }

00:00:00.000 --> 00:00:25.000
Red or green?
";

const ALL_EXAMPLES: [&str; 16] = [
    SIMPLE_CAPTION,
    MULTIPLE_LINES,
    STYLES,
    IDENTIFIERS,
    CLASS_AND_LANG,
    VOICES,
    POSITIONS,
    REGIONS,
    COMMENTS,
    CHAPTERS,
    NESTED,
    NOT_NESTED,
    DEFAULT_CLASSES,
    EVERY_TAG,
    PAST_FUTURE,
    CUE_REGION,
];

fn doc(text: &str) -> Document {
    parse(text).unwrap_or_else(|e| panic!("{e:?}\n{text}"))
}

/// (line, start, end, id, settings) of every cue.
fn cue_rows(d: &Document) -> Vec<(usize, f64, f64, Option<&str>, &str)> {
    d.cues()
        .map(|c| (c.line, c.start, c.end, c.id.as_deref(), c.settings.as_str()))
        .collect()
}

fn vtt_path() -> &'static Path {
    Path::new("site-b/take-7.vtt")
}

/// Problem lines from `read_lines`.
fn problem_lines(text: &str) -> Vec<usize> {
    read_lines(vtt_path(), text)
        .expect_err("should be rejected")
        .iter()
        .map(|p| p.line)
        .collect()
}

#[test]
fn spec_every_example_parses() {
    // W3C WebVTT §1 and §4-§8 examples: each is a valid WebVTT file.
    for (k, text) in ALL_EXAMPLES.into_iter().chain([CASCADE]).enumerate() {
        assert!(parse(text).is_ok(), "example {k}: {:?}", parse(text).err());
    }
}

#[test]
fn spec_simple_caption_file() {
    // W3C WebVTT §1.1 (#introduction-caption).
    let d = doc(SIMPLE_CAPTION);
    assert_eq!(d.header, "");
    let rows = cue_rows(&d);
    assert_eq!(rows.len(), 13);
    assert_eq!(rows[0], (3, 11.0, 13.0, None, ""));
    assert_eq!(rows[8], (27, 30.0, 31.5, None, "align:right size:50%"));
    assert_eq!(rows[9], (30, 30.5, 32.5, None, "align:left size:50%"));
    assert_eq!(rows[12], (39, 35.5, 38.0, None, ""));
    // Its cues overlap only where Roger and Neil talk over each other: cross-talk, legal.
    let lines = read_lines(vtt_path(), SIMPLE_CAPTION).unwrap();
    assert_eq!(lines.len(), 13);
    assert_eq!(lines[0].speaker.as_deref(), Some("Roger Bingham"));
    assert_eq!(lines[0].text, "We are in New York City");
    assert_eq!(lines[8].text, "When we e-mailed—");
    assert_eq!(lines[11].speaker.as_deref(), Some("Neil deGrasse Tyson"));
    assert_eq!(lines[11].text, "Laughs");
    assert!(
        lines
            .iter()
            .all(|l| l.words.is_empty() && l.extra.is_empty())
    );
}

#[test]
fn spec_line_breaks_become_spaces() {
    // W3C WebVTT §1.2 (#introduction-multiple-lines): the second cue has two lines.
    let d = doc(MULTIPLE_LINES);
    let second = d.cues().nth(1).unwrap();
    assert_eq!(
        second.text,
        "— It will perforate your stomach.\n— You could die."
    );
    assert_eq!(
        cue_text(&second.text).text,
        "— It will perforate your stomach. — You could die."
    );
    assert_eq!(cue_text(&second.text).speaker, None);
}

#[test]
fn spec_style_blocks_and_comments() {
    // W3C WebVTT §1.3 (#styling): STYLE, NOTE, STYLE, a cue with an identifier, NOTE.
    let d = doc(STYLES);
    let kinds: Vec<&str> = d
        .blocks
        .iter()
        .map(|b| match b {
            Block::Cue(_) => "cue",
            Block::Note(_) => "note",
            Block::Style(_) => "style",
            Block::Region(_) => "region",
        })
        .collect();
    assert_eq!(kinds, ["style", "note", "style", "cue", "note"]);
    assert_eq!(
        d.blocks[2],
        Block::Style("STYLE\n::cue(b) {\n  color: peachpuff;\n}".into())
    );
    assert_eq!(
        d.blocks[4],
        Block::Note("NOTE style blocks cannot appear after the first cue.".into())
    );
    let cue = d.cues().next().unwrap();
    assert_eq!((cue.id.as_deref(), cue.line), (Some("hello"), 18));
    assert_eq!((cue.start, cue.end), (0.0, 10.0));
    assert_eq!(cue_text(&cue.text).text, "Hello world.");

    // The example's last NOTE says why: a STYLE block after the cue is an error on its line.
    let moved = STYLES.replace(
        "NOTE style blocks cannot appear after the first cue.",
        "STYLE\n::cue { color: lime }",
    );
    let errors = parse(&moved).unwrap_err();
    assert_eq!(errors.len(), 1, "{errors:?}");
    assert_eq!(errors[0].line, 21);
    assert!(
        errors[0]
            .message
            .contains("STYLE block after the first cue")
    );
}

#[test]
fn spec_identifiers_and_overlapping_cues() {
    // W3C WebVTT §1.4 (#introduction-other-features): identifiers, non-ASCII text.
    let d = doc(IDENTIFIERS);
    let ids: Vec<_> = d.cues().map(|c| c.id.clone().unwrap()).collect();
    assert_eq!(ids, ["test", "123", "crédit de transcription"]);
    assert_eq!(
        cue_text(&d.cues().nth(2).unwrap().text).text,
        "Transcrit par Célestes™"
    );
    // "Different cues can overlap" (§4.1) but transcript lines cannot: the first two share
    // 0-2 s with no speakers, reported on the second one's timing line.
    assert_eq!(problem_lines(IDENTIFIERS), [8]);
}

#[test]
fn spec_classes_language_and_voices() {
    // W3C WebVTT §1.4: class and language spans, then voice spans with classes.
    let d = doc(CLASS_AND_LANG);
    assert_eq!(
        cue_rows(&d),
        [(3, 242.5, 245.0, None, ""), (6, 245.001, 247.8, None, "")]
    );
    let lines = read_lines(vtt_path(), CLASS_AND_LANG).unwrap();
    assert_eq!(lines[1].text, "Sur les playground, ici à Montpellier");

    let lines = read_lines(vtt_path(), VOICES).unwrap();
    let got: Vec<(&str, &str)> = lines
        .iter()
        .map(|l| (l.speaker.as_deref().unwrap(), l.text.as_str()))
        .collect();
    assert_eq!(
        got,
        [
            ("Esme", "It's a blue apple tree!"),
            ("Mary", "No way!"),
            ("Esme", "Hee! laughter"),
            ("Mary", "That's awesome!"),
        ]
    );
}

#[test]
fn spec_positions_and_regions() {
    // W3C WebVTT §1.4: cue settings and REGION blocks are valid and kept as written.
    let d = doc(POSITIONS);
    let settings: Vec<&str> = d.cues().map(|c| c.settings.as_str()).collect();
    assert_eq!(
        settings,
        [
            "position:10%,line-left align:left size:35%",
            "position:90% align:right size:35%",
            "position:45%,line-right align:center size:35%",
        ]
    );
    // Unvoiced cues that overlap cannot be transcript lines: cue 2 (3.0 s) overlaps cue 1
    // (until 4.0 s), cue 3 (4.0 s) overlaps cue 2 (until 6.5 s) but only touches cue 1.
    assert_eq!(problem_lines(POSITIONS), [6, 9]);

    let d = doc(REGIONS);
    assert_eq!(
        d.blocks[1],
        Block::Region(
            "REGION\nid:bill\nwidth:40%\nlines:3\nregionanchor:100%,100%\nviewportanchor:90%,90%\nscroll:up"
                .into()
        )
    );
    let starts: Vec<(usize, f64)> = d.cues().map(|c| (c.line, c.start)).collect();
    assert_eq!(
        starts,
        [
            (19, 0.0),
            (22, 2.5),
            (25, 5.0),
            (28, 7.5),
            (31, 10.0),
            (34, 12.5)
        ]
    );
    // Fred's roll-up cues overlap each other (same voice): 1 + 2 + 3 pairs; Bill's one pair.
    assert_eq!(problem_lines(REGIONS), [25, 28, 31, 31, 34, 34, 34]);

    let d = doc(CUE_REGION);
    assert_eq!(d.cues().nth(1).unwrap().settings, "region:editor-comments");
    // The same file naming a region nobody defined: the parser gives the cue no region
    // (§6.3), so it is read, with a warning on the timing line.
    let d = doc(&CUE_REGION.replace("region:editor-comments", "region:nowhere"));
    assert_eq!(d.cues().count(), 2);
    assert_eq!(d.warnings.len(), 1);
    assert_eq!(d.warnings[0].line, 11);
}

#[test]
fn spec_comments_and_chapters() {
    // W3C WebVTT §1.5 (#introduction-comments) and §1.6 (#introduction-chapters).
    let d = doc(COMMENTS);
    let Block::Note(first) = &d.blocks[0] else {
        panic!("{:?}", d.blocks[0])
    };
    assert_eq!(first.lines().count(), 8);
    assert!(first.starts_with("NOTE\nThis file was written by Jill."));
    assert_eq!(d.blocks[2], Block::Note("NOTE check next cue".into()));
    assert_eq!(d.blocks[4], Block::Note("NOTE end of file".into()));
    assert_eq!(read_lines(vtt_path(), COMMENTS).unwrap().len(), 2);

    let lines = read_lines(vtt_path(), CHAPTERS).unwrap();
    let spans: Vec<(f64, f64, &str)> = lines
        .iter()
        .map(|l| (l.start, l.end, l.text.as_str()))
        .collect();
    assert_eq!(
        spans,
        [
            (0.0, 10.7, "Title Slide"),
            (10.7, 47.6, "Introduction by Naomi Black"),
            (47.6, 110.1, "Impact of Captions on the Web"),
            (110.1, 213.0, "Requirements of a Video text format"),
        ]
    );
    let ids: Vec<_> = doc(CHAPTERS)
        .cues()
        .map(|c| c.id.clone().unwrap())
        .collect();
    assert_eq!(ids, ["Slide 1", "Slide 2", "Slide 3", "Slide 4"]);
}

#[test]
fn spec_nested_cues_overlap() {
    // W3C WebVTT §4.4 (#file-using-only-nested-cues): both files parse; as a transcript,
    // Topics and Presenters lie in Introduction, Achim's Demo and Timeline Panel in Scrolling
    // Effects (touching ends are not overlaps), and the two minutes overlap.
    assert_eq!(problem_lines(NESTED), [6, 9, 15, 18]);
    assert_eq!(problem_lines(NOT_NESTED), [6]);
}

#[test]
fn spec_every_tag_is_removed_and_ruby_text_left_out() {
    // W3C WebVTT §8.1 (#example-cue-selector), type selectors: c, i, u, b, ruby/rt, v, lang.
    // Ruby text is left out as in §6.6 "rules for extracting the chapter title"; each line
    // break is one space, so the ruby line's own trailing space makes a double space.
    let d = doc(EVERY_TAG);
    let t = cue_text(&d.cues().next().unwrap().text);
    assert_eq!(
        t.text,
        "Yellow! Yellow! Yellow! Yellow! Yellow! Yellow!  Yellow! Yellow!"
    );
    assert_eq!(t.speaker.as_deref(), Some("Kathryn"));
    // Default classes, §5 (#default-classes).
    let d = doc(DEFAULT_CLASSES);
    let texts: Vec<String> = d.cues().map(|c| cue_text(&c.text).text).collect();
    assert_eq!(
        texts,
        [
            "This is yellow text on a blue background",
            "This is magenta text on a black background"
        ]
    );
}

#[test]
fn spec_inline_timestamps_are_retimed() {
    // W3C WebVTT §8.1 (#example-cue-selector), `:past` and `:future`: inline timestamps.
    let mut d = doc(PAST_FUTURE);
    assert_eq!(
        cue_text(&d.cues().nth(1).unwrap().text).text,
        "No match  (no elements)"
    );
    assert_eq!(
        cue_text(&d.cues().nth(2).unwrap().text).text,
        "This  can  match  :past/:future"
    );
    // Speed perturbation by 1.1: every time t becomes t / 1.1, written to the millisecond:
    // 8/1.1 = 7.2727.., 12/1.1 = 10.9090.., 16/1.1 = 14.5454.., 18/1.1 = 16.3636..,
    // 20/1.1 = 18.1818.., 22/1.1 = 20, 24/1.1 = 21.8181...
    d.retime(|t| t / 1.1);
    let cues: Vec<_> = d.cues().collect();
    assert!((cues[1].start - 8.0 / 1.1).abs() < 1e-12 && (cues[2].end - 24.0 / 1.1).abs() < 1e-12);
    assert_eq!(cues[1].text, "No match <00:00:10.909> (no elements)");
    assert_eq!(
        cues[2].text,
        "<00:00:14.545> <c>This</c>\n<00:00:16.364> <c>can</c>\n<00:00:18.182> <c>match</c>\n\
         <00:00:20.000> <c>:past/:future</c>\n<00:00:21.818>"
    );
    assert_eq!(cues[0].text, "<c>No match (no timestamps)</c>");
    let written = d.to_text();
    assert!(
        written.contains("00:00:07.273 --> 00:00:14.545\nNo match <00:00:10.909>"),
        "{written}"
    );
    // And the rewritten file is valid: timestamps still inside their cues.
    let again = doc(&written);
    assert_eq!(again.cues().nth(2).unwrap().text, cues[2].text);

    // A shift of 2.5 s: exact numbers.
    let mut d = doc(PAST_FUTURE);
    d.retime(|t| t + 2.5);
    let third = d.cues().nth(2).unwrap();
    assert_eq!((third.start, third.end), (18.5, 26.5));
    assert!(
        third
            .text
            .starts_with("<00:00:18.500> <c>This</c>\n<00:00:20.500>")
    );
    assert!(third.text.ends_with("\n<00:00:26.500>"));
}

#[test]
fn to_text_round_trips_every_example() {
    for text in ALL_EXAMPLES.into_iter().chain([CASCADE]) {
        let d = doc(text);
        let back = doc(&d.to_text());
        assert_eq!(back, d, "{text}");
    }
    // Examples already written with hours and single blank lines come back byte for byte.
    for text in [
        STYLES,
        POSITIONS,
        REGIONS,
        CHAPTERS,
        EVERY_TAG,
        PAST_FUTURE,
        CUE_REGION,
        CASCADE,
    ] {
        assert_eq!(doc(text).to_text(), text);
    }
    // Short timestamps are written with hours; nothing else changes.
    assert_eq!(
        doc(VOICES).to_text(),
        VOICES
            .replace("\n00:", "\n00:00:")
            .replace(" 00:", " 00:00:")
    );
}

#[test]
fn to_text_keeps_header_bom_and_line_endings_aside() {
    // A header text and header lines (kept), a BOM and CRLF line ends (not kept).
    let text = "\u{feff}WEBVTT - cold store, bay 4\r\nKind: captions\r\nLanguage: de\r\n\r\n\
                intro\r\n01:00:00.250 --> 01:00:01.750 line:-1\r\n<v Ana María>Tür 3 &amp; 4\r\n";
    let d = doc(text);
    assert_eq!(
        d.header,
        " - cold store, bay 4\nKind: captions\nLanguage: de"
    );
    let cue = d.cues().next().unwrap();
    assert_eq!((cue.line, cue.start, cue.end), (6, 3600.25, 3601.75));
    assert_eq!(
        d.to_text(),
        "WEBVTT - cold store, bay 4\nKind: captions\nLanguage: de\n\n\
         intro\n01:00:00.250 --> 01:00:01.750 line:-1\n<v Ana María>Tür 3 &amp; 4\n"
    );
    assert_eq!(doc(&d.to_text()), d);
    // CR alone also ends lines.
    assert_eq!(doc(&text.replace("\r\n", "\r")), d);
}

// ---------------------------------------------------------------------------------------
// Malformed files: the right line for each.

/// (line, message) of every error.
fn errors(text: &str) -> Vec<(usize, String)> {
    parse(text)
        .expect_err("should not parse")
        .into_iter()
        .map(|e| (e.line, e.message))
        .collect()
}

fn one_error(text: &str) -> (usize, String) {
    let mut e = errors(text);
    assert_eq!(e.len(), 1, "{e:?}");
    e.remove(0)
}

#[test]
fn missing_or_garbled_signature_is_line_one() {
    // W3C WebVTT §4.1: the file starts with "WEBVTT", then a space, a tab or a line end.
    let cue = "\n\n00:01.000 --> 00:02.000\nhello\n";
    for first in ["", "WEBVTTX", "webvtt", "WEBVTT-", " WEBVTT", "NOTE"] {
        let (line, message) = one_error(&format!("{first}{cue}"));
        assert_eq!(line, 1, "{first:?}: {message}");
    }
    assert!(one_error(&format!("WEBVTTX{cue}")).1.contains("'X'"));
    assert_eq!(one_error("00:01.000 --> 00:02.000\nhello\n").0, 1);
    assert_eq!(one_error("").0, 1);
    for ok in ["WEBVTT", "WEBVTT\t", "WEBVTT - text", "\u{feff}WEBVTT"] {
        assert!(parse(&format!("{ok}{cue}")).is_ok(), "{ok:?}");
    }
}

#[test]
fn bad_timestamps_name_the_timing_line() {
    // W3C WebVTT §4.1 "WebVTT timestamp".
    for (bad, why) in [
        ("00:61.000", "seconds must be 00-59"),
        ("1:02.000", "minutes need exactly two digits"),
        ("00:01.00", "three digits"),
        ("1:00:01.000", "hours need two or more digits"),
        ("00:00:01,000", "SRT"),
    ] {
        for (text, line) in [
            (format!("WEBVTT\n\n{bad} --> 00:09.000\nhi\n"), 3),
            (
                format!("WEBVTT\n\n00:00.500 --> 00:00.900\nok\n\nid\n00:01.000 --> {bad}\nhi\n"),
                7,
            ),
            // CRLF and CR count as one line end each.
            (
                format!(
                    "WEBVTT\r\n\r\n00:00.500 --> 00:00.900\r\nok\r\n\r\n{bad} --> 00:09.000\r\n"
                ),
                6,
            ),
            (
                format!("WEBVTT\r\r00:00.500 --> 00:00.900\rok\r\r{bad} --> 00:09.000\r"),
                6,
            ),
        ] {
            let (at, message) = one_error(&text);
            assert_eq!(at, line, "{text:?}: {message}");
            assert!(message.contains(why) && message.contains(bad), "{message}");
        }
    }
}

#[test]
fn cue_times_must_move_forward() {
    // W3C WebVTT §4.1 "WebVTT cue timings": end greater than start; starts in file order.
    let (line, m) = one_error("WEBVTT\n\n00:00:05.000 --> 00:00:04.999\nhi\n");
    assert_eq!(line, 3);
    assert!(
        m.contains("end 00:00:04.999 is not after start 00:00:05.000"),
        "{m}"
    );
    assert_eq!(one_error("WEBVTT\n\n00:05.000 --> 00:05.000\nhi\n").0, 3);
    let (line, m) = one_error(
        "WEBVTT\n\n00:05.000 --> 00:06.000\na\n\n00:07.000 --> 00:08.000\nb\n\n\
         00:04.000 --> 00:09.000\nc\n",
    );
    assert_eq!(line, 9);
    assert!(
        m.contains("line 6") && m.contains("start-time order"),
        "{m}"
    );
    // Equal starts are in order.
    assert!(parse("WEBVTT\n\n00:05.000 --> 00:06.000\na\n\n00:05.000 --> 00:07.000\nb\n").is_ok());
}

#[test]
fn overlapping_cues_are_rejected_unless_cross_talk() {
    let two = |a: &str, b: &str| {
        format!(
            "WEBVTT\n\nNOTE shift 2\n\n00:01.000 --> 00:03.000\n{a}\n\n00:02.000 --> 00:04.000\n{b}\n"
        )
    };
    let problems = read_lines(vtt_path(), &two("<v Ana>ready", "<v Ana>go")).unwrap_err();
    assert_eq!(problems.len(), 1);
    assert_eq!(
        (problems[0].file.as_path(), problems[0].line),
        (vtt_path(), 8)
    );
    assert!(
        problems[0]
            .to_string()
            .starts_with("site-b/take-7.vtt line 8: "),
        "{}",
        problems[0]
    );
    assert_eq!(problem_lines(&two("ready", "go")), [8]);
    assert_eq!(problem_lines(&two("<v Ana>ready", "go")), [8]);
    // Different speakers, even with classes: cross-talk is legal.
    let lines = read_lines(vtt_path(), &two("<v.loud Ana>ready", "<v Bo Li>go")).unwrap();
    assert_eq!(lines.len(), 2);
    assert_eq!(lines[1].speaker.as_deref(), Some("Bo Li"));
    // Touching is not overlapping.
    let touching = "WEBVTT\n\n00:01.000 --> 00:02.000\na\n\n00:02.000 --> 00:03.000\nb\n";
    assert_eq!(read_lines(vtt_path(), touching).unwrap().len(), 2);
}

#[test]
fn style_and_region_after_a_cue_name_their_line() {
    // W3C WebVTT §4.1: style and region blocks come before every cue.
    let cue = "00:01.000 --> 00:02.000\nhi\n";
    let (line, m) = one_error(&format!(
        "WEBVTT\n\n{cue}\nSTYLE\n::cue {{ color: lime }}\n"
    ));
    assert_eq!(line, 6);
    assert!(m.contains("STYLE"), "{m}");
    let (line, m) = one_error(&format!(
        "WEBVTT\n\n{cue}\nNOTE a region:\n\nREGION\nid:late\n"
    ));
    assert_eq!(line, 8);
    assert!(m.contains("REGION"), "{m}");
    // Before the cue they are fine; "STYLE" as a cue identifier is an identifier.
    assert!(
        parse(&format!(
            "WEBVTT\n\nSTYLE\n::cue {{ color: lime }}\n\n{cue}"
        ))
        .is_ok()
    );
    let d = doc(&format!(
        "WEBVTT\n\n{cue}\nSTYLE\n00:03.000 --> 00:04.000\nstyled\n"
    ));
    assert_eq!(d.cues().nth(1).unwrap().id.as_deref(), Some("STYLE"));
}

#[test]
fn bad_cue_settings_are_warnings_on_the_timing_line_and_the_file_is_read() {
    // W3C WebVTT §4.5 "WebVTT cue settings" (the syntax); each of these breaks it.
    for setting in [
        "align:middle",
        "size:101%",
        "position:-5%",
        "line:1.5",
        "vertical:tb",
        "colour:red",
        "align",
        "size:50% size:60%",
    ] {
        let text = format!(
            "WEBVTT\n\nNOTE one\n\n00:01.000 --> 00:02.000\nfine\n\n00:03.000 --> 00:04.000 {setting}\nhi\n"
        );
        let d = doc(&text);
        assert_eq!(d.cues().count(), 2, "{setting}");
        assert_eq!(d.cues().nth(1).unwrap().settings, setting);
        assert_eq!(d.warnings.len(), 1, "{setting}: {:?}", d.warnings);
        assert_eq!(d.warnings[0].line, 8, "{setting}: {:?}", d.warnings);
        // The transcript reader keeps both cues and hands the warning on, naming the file.
        let read = read_transcript(vtt_path(), &text).unwrap();
        assert_eq!(read.lines.len(), 2);
        assert_eq!(read.warnings.len(), 1);
        assert_eq!(
            (read.warnings[0].file.as_path(), read.warnings[0].line),
            (vtt_path(), 8)
        );
    }
    // Region settings, §4.4: on their own line within the REGION block.
    let (line, m) =
        one_error("WEBVTT\n\nREGION\nid:a\nwidth:140%\n\n00:01.000 --> 00:02.000\nhi\n");
    assert_eq!(line, 5);
    assert!(m.contains("width"), "{m}");
    assert_eq!(one_error("WEBVTT\n\nREGION\nwidth:40%\n").0, 3); // no id
}

#[test]
fn cue_settings_follow_the_specifications_parser() {
    // W3C WebVTT §6.3, "Parse the WebVTT cue settings" (https://www.w3.org/TR/webvtt1/),
    // quoted beside each case. A setting the parser skips is reported as ignored; one it
    // applies although the syntax (§4.5) forbids it is reported as kept; a valid one is not
    // reported at all. The file is read in every case.
    let cases: &[(&str, Option<&str>, &str)] = &[
        // "If setting does not contain a U+003A COLON character (:), or if the first U+003A
        // COLON character (:) in setting is either the first or last character of setting,
        // then jump to the step labeled next setting."
        ("align", Some("ignored"), "no colon"),
        (":start", Some("ignored"), "colon first"),
        ("align:", Some("ignored"), "colon last"),
        // Names other than region, vertical, line, position, size and align match no substep.
        ("colour:red", Some("ignored"), "unknown name"),
        ("Align:start", Some("ignored"), "names are case-sensitive"),
        // align: "If value is a case-sensitive match for the string "start" ... "center" ...
        // "end" ... "left" ... "right""; nothing else sets the alignment.
        ("align:middle", Some("ignored"), "align has no middle"),
        ("align:Center", Some("ignored"), "values are case-sensitive"),
        ("align:center", None, "valid"),
        // vertical: only "rl" and "lr" set a writing direction.
        ("vertical:tb", Some("ignored"), "vertical rl or lr"),
        // size: "If parse a percentage string from value doesn't fail ... otherwise jump to
        // the step labeled next setting."
        ("size:101%", Some("ignored"), "over 100%"),
        ("size:50", Some("ignored"), "no percent sign"),
        // position: a percentage, then "Otherwise, if colalign is not null, then jump to the
        // step labeled next setting."
        ("position:-5%", Some("ignored"), "negative percentage"),
        (
            "position:50%,left",
            Some("ignored"),
            "left is not a position alignment",
        ),
        ("position:50%,line-left", None, "valid"),
        // line: "If linepos does not contain at least one ASCII digit, then jump to the step
        // labeled next setting."
        ("line:auto", Some("ignored"), "no digit"),
        // "If any character in linepos other than the first character is a U+002D
        // HYPHEN-MINUS character (-), then jump to the step labeled next setting."
        ("line:1-2", Some("ignored"), "inner hyphen"),
        // "If there is a U+002E DOT character (.) and the character before or the character
        // after is not an ASCII digit, or if the U+002E DOT character (.) is the first or the
        // last character, then jump to the step labeled next setting."
        ("line:1.", Some("ignored"), "dot last"),
        (
            "line:0,middle",
            Some("ignored"),
            "linealign start, center or end",
        ),
        // A fractional line number passes every step above, so the parser applies it, but the
        // syntax wants "one or more ASCII digits".
        ("line:1.5", Some("kept"), "parsed as a number"),
        ("line:-1,end", None, "valid"),
        // region: "Let cue's WebVTT cue region be the last WebVTT region in regions whose
        // WebVTT region identifier is value, if any, or null otherwise": no such region, no
        // region.
        ("region:nowhere", Some("ignored"), "unknown region"),
        // Settings are applied in order, so a second one of a name wins; the syntax allows
        // each name once.
        ("size:50% size:60%", Some("kept"), "given twice"),
    ];
    for &(setting, fate, why) in cases {
        let text = format!("WEBVTT\n\n00:01.000 --> 00:02.000 {setting}\nhi\n");
        let d = doc(&text);
        assert_eq!(d.cues().count(), 1, "{setting}");
        match fate {
            None => assert!(d.warnings.is_empty(), "{setting} ({why}): {:?}", d.warnings),
            Some(word) => {
                assert_eq!(d.warnings.len(), 1, "{setting} ({why}): {:?}", d.warnings);
                let m = &d.warnings[0].message;
                assert_eq!(d.warnings[0].line, 3, "{setting}");
                let said = if m.contains("ignored, as the WebVTT parser does") {
                    "ignored"
                } else if m.contains("kept as written") {
                    "kept"
                } else {
                    "neither"
                };
                assert_eq!(said, word, "{setting} ({why}): {m}");
            }
        }
    }
}

#[test]
fn structure_errors_name_their_line() {
    // No "-->": not a cue.
    let (line, m) =
        one_error("WEBVTT\n\n00:01.000 --> 00:02.000\na\n\nid\n00:03.000 00:04.000\nb\n");
    assert_eq!(line, 7);
    assert!(m.contains("without \"-->\""), "{m}");
    // Spaces around "-->" are required: one error for each side, both on the timing line.
    let both = errors("WEBVTT\n\n00:01.000-->00:02.000\na\n");
    assert_eq!(
        both.iter().map(|e| e.0).collect::<Vec<_>>(),
        [3, 3],
        "{both:?}"
    );
    // A line with "-->" in cue text: the parser starts a new cue there; a blank line is missing.
    let text = "WEBVTT\n\n00:01.000 --> 00:02.000\na\n00:02.000 --> 00:03.000\nb\n";
    let (line, m) = one_error(text);
    assert_eq!(line, 5);
    assert!(m.contains("blank line"), "{m}");
    // ... and right after the header.
    assert_eq!(one_error("WEBVTT\n00:01.000 --> 00:02.000\na\n").0, 2);
    // A STYLE block with no blank line after the signature would be read as header text.
    assert_eq!(one_error("WEBVTT\nSTYLE\n::cue { color: lime }\n").0, 2);
    // A stray block, a duplicate identifier, a bad inline timestamp and one outside its cue.
    assert_eq!(one_error("WEBVTT\n\nhello there\n").0, 3);
    assert_eq!(
        one_error("WEBVTT\n\nx\n00:01.000 --> 00:02.000\na\n\nx\n00:03.000 --> 00:04.000\nb\n").0,
        7
    );
    assert_eq!(
        one_error("WEBVTT\n\n00:01.000 --> 00:02.000\na\nb <00:01.5> c\n").0,
        5
    );
    assert_eq!(
        one_error("WEBVTT\n\n00:01.000 --> 00:02.000\na <00:02.001>\n").0,
        4
    );
}

#[test]
fn every_error_is_collected() {
    let text = "WEBVTT\n\n00:01.000 --> 00:00.500\na\n\n00:02.000 --> 00:03.000 align:top\nb\n\n\
                00:04.000 --> 00:61.000\nc\n\nSTYLE\n::cue {}\n";
    // The bad setting on line 6 is a warning, not an error (see the cue settings tests).
    let lines: Vec<usize> = errors(text).iter().map(|e| e.0).collect();
    assert_eq!(lines, [3, 9, 12]);
    // read_lines reports the same, naming the file.
    let problems = read_lines(vtt_path(), text).unwrap_err();
    assert_eq!(
        problems.iter().map(|p| p.line).collect::<Vec<_>>(),
        [3, 9, 12]
    );
    assert!(problems.iter().all(|p| p.file == vtt_path()));
}

#[test]
fn character_references_decode_as_pythons_html_unescape() {
    // Python's html.unescape (standard library) decodes "using the rules defined by the HTML 5
    // standard for both valid and invalid character references, and the list of HTML 5 named
    // character references" (html.entities.html5, 2,231 names): the same table and the same
    // longest-match rule for names without a semicolon that WebVTT's cue text tokenizer
    // takes from HTML. Every name of the table, between spaces and glued to letters, and the
    // numeric references whose handling the two agree on (Python drops some control
    // characters the HTML standard keeps, so those are left out).
    let names = common::run_python(
        "import html.entities\nfor n in sorted(html.entities.html5): print(n)",
        &[],
    );
    let mut inputs: Vec<String> = names
        .lines()
        .flat_map(|n| [format!("x &{n} y"), format!("q&{n}zz")])
        .collect();
    assert_eq!(inputs.len(), 2 * 2231);
    // 0x81, 0x8d, 0x8f, 0x90 and 0x9d have no replacement in the HTML standard's table and
    // stay controls there, where Python drops them.
    let numeric = (0x80..=0x9f).filter(|v| ![0x81, 0x8d, 0x8f, 0x90, 0x9d].contains(v));
    for v in numeric.chain([0x20ac, 0xe9, 0x10fffd, 0x110000, 0xd800, 0]) {
        inputs.push(format!("a&#{v};b &#x{v:X}g &#{v} d"));
    }
    inputs.extend(
        [
            "&notit;",
            "&ampx",
            "&amp;amp;",
            "& bare",
            "&;",
            "&#;&#x;",
            "&bogus;",
            "AT&T",
        ]
        .map(String::from),
    );
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("in.json");
    std::fs::write(&path, serde_json::to_string(&inputs).unwrap()).unwrap();
    // cue_text then turns line breaks into spaces and trims ASCII whitespace at both ends.
    let want = common::run_python(
        "import html, json, sys\n\
         xs = json.load(open(sys.argv[1]))\n\
         out = [html.unescape(x).replace('\\r', ' ').replace('\\n', ' ').strip(' \\t\\n\\f\\r') for x in xs]\n\
         print(json.dumps(out))",
        &[path.to_str().unwrap()],
    );
    let want: Vec<String> = serde_json::from_str(&want).unwrap();
    let mut wrong = Vec::new();
    for (input, want) in inputs.iter().zip(&want) {
        let got = cue_text(input).text;
        if &got != want {
            wrong.push(format!("{input:?}: {got:?}, html.unescape {want:?}"));
        }
    }
    assert!(
        wrong.is_empty(),
        "{} differ:\n{}",
        wrong.len(),
        wrong.join("\n")
    );
}

// ---------------------------------------------------------------------------------------
// Writing transcript lines.

fn line(start: f64, end: f64, text: &str, speaker: Option<&str>) -> Line {
    Line {
        start,
        end,
        text: text.into(),
        speaker: speaker.map(String::from),
        words: Vec::new(),
        extra: Map::new(),
    }
}

#[test]
fn write_lines_writes_the_documented_form() {
    let mut first = line(1.25, 2.0, "Bay 3 & 4 -> <ok>\nnext", Some("Ana María"));
    first.words.push(retake::transcript::Word {
        start: 1.25,
        end: 1.5,
        text: "Bay".into(),
        extra: Map::new(),
    });
    let text = write_lines(&[first, line(3723.0044, 3724.5, "done", None)]);
    assert_eq!(
        text,
        "WEBVTT\n\n00:00:01.250 --> 00:00:02.000\n<v Ana María>Bay 3 &amp; 4 -&gt; &lt;ok&gt; next\n\n\
         01:02:03.004 --> 01:02:04.500\ndone\n"
    );
    // A line under a millisecond long cannot be a cue: written as given, rejected on reading.
    let zero = write_lines(&[line(5.0, 5.0004, "blip", None)]);
    assert_eq!(problem_lines(&zero), [3]);
}

/// Awkward lines for the reference check: ampersands, <, >, "-->", non-ASCII, speakers with
/// spaces, times at 0, past an hour and on half milliseconds.
fn awkward_lines() -> Vec<Line> {
    vec![
        line(0.0, 0.0015, "Bay 3 & 4 <ok> --> go", Some("Dock Lead")),
        line(
            0.0015,
            1.0005,
            "&amp; is written as such; so is &lt;",
            Some("R&D > Ops"),
        ),
        line(1.0005, 2.0005, "-->", None),
        line(
            2.0005,
            59.9995,
            "Kühlhaus Süd: −18 °C, ½ Palette — 冷库 😀",
            Some("Ólöf Ström"),
        ),
        line(
            59.9995,
            3599.9995,
            "<v Fake>not a voice</v>",
            Some("a <b> c"),
        ),
        line(
            3599.9995,
            3725.2505,
            "NOTE this is speech, not a comment",
            None,
        ),
        line(
            3725.2505,
            35999.9994,
            "x&#65;y &nbsp; tail",
            Some("Ana  María"),
        ),
    ]
}

#[test]
fn webvtt_py_reads_what_write_lines_writes() {
    // Reference: webvtt-py 0.5.1 (PyPI). Its caption.text drops every <...> tag but keeps
    // character references, so Python's html.unescape decodes them; caption.voice is the
    // annotation of a leading <v ...> tag, also unescaped. Times are compared in whole
    // milliseconds from caption.start_time / end_time.
    let lines = awkward_lines();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("awkward.vtt");
    std::fs::write(&path, write_lines(&lines)).unwrap();
    let out = common::run_python(
        r#"
import html, json, sys, webvtt
rows = []
for c in webvtt.read(sys.argv[1]).captions:
    ms = lambda t: ((t.hours * 60 + t.minutes) * 60 + t.seconds) * 1000 + t.milliseconds
    rows.append({"start_ms": ms(c.start_time), "end_ms": ms(c.end_time),
                 "text": html.unescape(c.text),
                 "voice": None if c.voice is None else html.unescape(c.voice)})
print(json.dumps(rows))
"#,
        &[path.to_str().unwrap()],
    );
    let rows: Vec<Value> = serde_json::from_str(&out).unwrap();
    assert_eq!(rows.len(), lines.len());
    for (l, row) in lines.iter().zip(&rows) {
        let ms = |key: &str| row[key].as_u64().unwrap() as f64 / 1000.0;
        // Half a millisecond, plus float slack for the subtraction.
        assert!(
            (ms("start_ms") - l.start).abs() <= 0.0005 + 1e-9,
            "{l:?} {row}"
        );
        assert!((ms("end_ms") - l.end).abs() <= 0.0005 + 1e-9, "{l:?} {row}");
        assert_eq!(row["text"], l.text.as_str(), "{l:?}");
        // webvtt-py does not collapse whitespace in the annotation; ours was written as given.
        assert_eq!(row["voice"].as_str(), l.speaker.as_deref(), "{l:?}");
    }
    // And our own reader agrees with the lines (the speaker's double space collapses, as the
    // specification's tokenizer does for annotations).
    let back = read_lines(vtt_path(), &write_lines(&lines)).unwrap();
    for (l, b) in lines.iter().zip(&back) {
        assert_eq!(b.text, l.text);
        let expect = l
            .speaker
            .as_deref()
            .map(|s| s.split_whitespace().collect::<Vec<_>>().join(" "));
        assert_eq!(b.speaker, expect);
    }
}

#[test]
fn format_timestamp_matches_python_decimal_rounding() {
    // Reference: Python's decimal module (stdlib) converts each f64 exactly and rounds it to
    // the millisecond, halves up. Values: half-millisecond points, hours, and a spread.
    let mut values = vec![
        0.0,
        0.0005,
        0.0015,
        0.0625,
        1.0005,
        2.0005,
        59.9995,
        59.9996,
        3599.9995,
        3600.0,
        3725.2505,
        35999.9994,
        1e-7,
        0.000_499_999,
        359_999.999_5,
    ];
    let mut state = 0x9e37_79b9_7f4a_7c15u64;
    for k in 0..3000u64 {
        // splitmix64, so the spread is the same on every run.
        state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        let u = (z >> 11) as f64 / (1u64 << 53) as f64;
        values.push(if k % 2 == 0 {
            u * 400_000.0
        } else {
            (u * 8e8).floor() / 2000.0
        });
    }
    let args: Vec<String> = values.iter().map(|v| format!("{v:?}")).collect();
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = common::run_python(
        r#"
import sys
from decimal import Decimal, ROUND_HALF_UP
for a in sys.argv[1:]:
    ms = int(Decimal(float(a)).quantize(Decimal("0.001"), rounding=ROUND_HALF_UP) * 1000)
    h, rest = divmod(ms, 3600000)
    print("%02d:%02d:%02d.%03d" % (h, rest // 60000, rest // 1000 % 60, rest % 1000))
"#,
        &refs,
    );
    let expected: Vec<&str> = out.lines().collect();
    assert_eq!(expected.len(), values.len());
    for (v, e) in values.iter().zip(expected) {
        assert_eq!(format_timestamp(*v), e, "{v:?}");
    }
}

// ---------------------------------------------------------------------------------------
// Round trips over random line sets.

/// Text from awkward fragments, trimmed of ASCII whitespace as reading does.
fn arb_text() -> impl Strategy<Value = String> {
    let pieces = prop::sample::select(vec![
        "Bay",
        "3",
        " ",
        "&",
        "&amp;",
        "<",
        ">",
        "-->",
        "<v X>",
        "</v>",
        "&lt;",
        "&#65;",
        "é",
        "冷库",
        "😀",
        "\u{a0}",
        "\t",
        ";",
        "<00:00:01.000>",
        "NOTE",
        "WEBVTT",
        "'",
        "\"",
    ]);
    prop::collection::vec(pieces, 0..12).prop_map(|p| {
        p.concat()
            .trim_matches(|c: char| c.is_ascii_whitespace())
            .to_string()
    })
}

/// A speaker: words joined by single spaces, as an annotation reads back.
fn arb_speaker() -> impl Strategy<Value = Option<String>> {
    let words = prop::sample::select(vec![
        "Ana", "María", "R&D", ">", "<", "-->", "O'Neil", "冷库", "&amp;", ".x", "Bo",
    ]);
    prop::option::of(prop::collection::vec(words, 1..4).prop_map(|w| w.join(" ")))
}

/// A time: anywhere, or on a half-millisecond grid (where rounding is decided).
fn arb_time(max: f64) -> impl Strategy<Value = f64> {
    prop_oneof![
        0.0..max,
        (0..(max * 2000.0) as u64).prop_map(|k| k as f64 / 2000.0),
    ]
}

/// Lines one after another: each starts at or after the previous end and lasts at least
/// 2 ms, so rounding to the millisecond keeps them in order, apart and non-empty.
fn arb_track(speaker: impl Strategy<Value = Option<String>>) -> impl Strategy<Value = Vec<Line>> {
    (
        arb_time(7200.0),
        prop::collection::vec((arb_time(5.0), 0.002..8.0f64, arb_text(), speaker), 0..25),
    )
        .prop_map(|(mut t, rows)| {
            rows.into_iter()
                .map(|(gap, dur, text, speaker)| {
                    let start = t + gap;
                    t = start + dur;
                    Line {
                        start,
                        end: t,
                        text,
                        speaker,
                        words: Vec::new(),
                        extra: Map::new(),
                    }
                })
                .collect()
        })
}

fn without_lines(mut d: Document) -> Document {
    for b in &mut d.blocks {
        if let Block::Cue(c) = b {
            c.line = 0;
        }
    }
    d
}

fn assert_same(lines: &[Line], back: &[Line]) -> Result<(), TestCaseError> {
    prop_assert_eq!(back.len(), lines.len());
    for (a, b) in lines.iter().zip(back) {
        prop_assert!(
            (a.start - b.start).abs() <= 0.0005 + 1e-9,
            "{} vs {}",
            a.start,
            b.start
        );
        prop_assert!(
            (a.end - b.end).abs() <= 0.0005 + 1e-9,
            "{} vs {}",
            a.end,
            b.end
        );
        prop_assert_eq!(&a.text, &b.text);
        prop_assert_eq!(&a.speaker, &b.speaker);
    }
    Ok(())
}

proptest! {
    #[test]
    fn lines_survive_write_and_read(lines in arb_track(arb_speaker())) {
        let text = write_lines(&lines);
        let back = read_lines(vtt_path(), &text);
        prop_assert!(back.is_ok(), "{:?}\n{}", back.err(), text);
        assert_same(&lines, &back.unwrap())?;
        // The document level agrees: parse, write, parse again gives the same cues (an empty
        // payload line written by write_lines is a second blank line, so line numbers aside).
        let d = parse(&text).unwrap();
        prop_assert_eq!(without_lines(parse(&d.to_text()).unwrap()), without_lines(d));
    }

    #[test]
    fn cross_talk_survives_write_and_read(
        a in arb_track(Just(Some("Ana María".to_string()))),
        b in arb_track(Just(Some("Bo & Co".to_string()))),
    ) {
        let mut lines: Vec<Line> = a.into_iter().chain(b).collect();
        lines.sort_by(|x, y| x.start.total_cmp(&y.start));
        let back = read_lines(vtt_path(), &write_lines(&lines));
        prop_assert!(back.is_ok(), "{:?}", back.err());
        assert_same(&lines, &back.unwrap())?;
    }

    #[test]
    fn an_overlap_is_reported_on_its_cue_line(
        lines in arb_track(Just(None)).prop_filter("two or more", |l| l.len() >= 2),
        pick in any::<prop::sample::Index>(),
    ) {
        // Stretch one line's end into the next: the next cue's timing line is 3 + 3k.
        let k = 1 + pick.index(lines.len() - 1);
        let mut lines = lines;
        lines[k - 1].end = lines[k].start + 0.002;
        // Line k + 1 starts at or after line k's end, itself 2 ms or more past the new end.
        prop_assert_eq!(problem_lines(&write_lines(&lines)), [3 + 3 * k]);
    }

    #[test]
    fn any_text_gets_an_answer_with_lines_inside_the_file(
        pieces in prop::collection::vec(prop::sample::select(vec![
            "WEBVTT", "\n", "\n\n", "\r\n", "\r", "-->", " --> ", " ", "\t", "00:01.000",
            "01:00:00.500", "00:61.000", "NOTE", "STYLE", "REGION", "id:x", " region:x",
            " align:start", "<v A B>", "</v>", "<", ">", "&", "&#", "&amp;", "<00:00:01.000>",
            "<ruby>", "<rt>", "é", "\u{feff}", "\0", ":", ".", "1",
        ]), 0..60),
    ) {
        let text = pieces.concat();
        let last = text.replace("\r\n", "\n").replace('\r', "\n").split('\n').count();
        match parse(&text) {
            Ok(d) => prop_assert!(d.cues().all(|c| (1..=last).contains(&c.line))),
            Err(e) => prop_assert!(e.iter().all(|e| (1..=last).contains(&e.line)), "{:?}", e),
        }
        if let Err(problems) = read_lines(vtt_path(), &text) {
            prop_assert!(problems.iter().all(|p| (1..=last).contains(&p.line)));
        }
    }

    #[test]
    fn retime_moves_every_time_through_the_map(
        lines in arb_track(arb_speaker()),
        scale in 0.5..2.0f64,
        shift in 0.0..30.0f64,
    ) {
        let mut d = parse(&write_lines(&lines)).unwrap();
        let before: Vec<(f64, f64)> = d.cues().map(|c| (c.start, c.end)).collect();
        d.retime(|t| t * scale + shift);
        for ((s, e), c) in before.iter().zip(d.cues()) {
            prop_assert!((c.start - (s * scale + shift)).abs() < 1e-9);
            prop_assert!((c.end - (e * scale + shift)).abs() < 1e-9);
        }
    }
}
