//! `retake slice`: parse the options, slice, print one closing summary.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use super::Exit;

use retake::audio::{ChannelPolicy, SampleFormat};
use retake::run::{MANIFEST_NAME, REJECTS_NAME};
use retake::slice::plan::{Limits, PadRange};
use retake::slice::{self, LEFT_OUT_NAME, SliceSpec, SliceSummary};

/// Options of `retake slice`.
#[derive(Debug, clap::Args)]
pub struct SliceArgs {
    /// Input manifest (JSON Lines, one clip per line).
    manifest: PathBuf,
    /// Output folder: slices/, manifest.jsonl, left_out.jsonl and rejects.jsonl are written here.
    #[arg(long, short)]
    out: PathBuf,
    /// Shortest slice in seconds, padding included.
    #[arg(long, value_name = "SECONDS", default_value_t = 2.0)]
    shortest: f64,
    /// Longest slice in seconds, padding included.
    #[arg(long, value_name = "SECONDS", default_value_t = 15.0)]
    longest: f64,
    /// Silence kept on each side of the speech, seconds: a value or LOW..HIGH drawn
    /// uniformly per gap. Never more than half the gap to the next word.
    #[arg(long, value_name = "SECONDS", default_value = "0.2", value_parser = parse_pad)]
    pad: (f64, f64),
    /// Seed of the pad draws.
    #[arg(long, default_value_t = 0)]
    seed: u64,
    /// Output format of the slices, from the output-format table: pcm16 (16-bit WAV),
    /// pcm24, float32 (samples exactly as decoded), flac16 or flac24.
    #[arg(long, value_name = "NAME", default_value = "pcm16", value_parser = super::parse_audio_format)]
    format: SampleFormat,
    /// The same as `--format float32`.
    #[arg(long, hide = true, conflicts_with = "format")]
    float: bool,
    /// Worker threads (default: one per core).
    #[arg(long, short = 'j', value_parser = super::parse_threads)]
    threads: Option<usize>,
    /// Multichannel input: `mix` (mean of channels) or a channel number from 0.
    #[arg(long, default_value = "mix", value_parser = super::parse_channels)]
    channels: ChannelPolicy,
}

/// `0.2` or `0.1..0.3` as (low, high); ranges are checked by the library.
fn parse_pad(s: &str) -> Result<(f64, f64), String> {
    let number = |t: &str| {
        t.trim()
            .parse::<f64>()
            .map_err(|_| format!("`{s}`: expected seconds (0.2) or a range LOW..HIGH (0.1..0.3)"))
    };
    match s.split_once("..") {
        Some((low, high)) => Ok((number(low)?, number(high)?)),
        None => number(s).map(|x| (x, x)),
    }
}

/// Run `retake slice`.
pub fn slice(args: SliceArgs) -> ExitCode {
    let checked = Limits::new(args.shortest, args.longest)
        .and_then(|limits| PadRange::new(args.pad.0, args.pad.1).map(|pad| (limits, pad)));
    let (limits, pad) = match checked {
        Ok(v) => v,
        Err(e) => {
            eprintln!("retake: slice: {e}");
            return Exit::Usage.into();
        }
    };
    let spec = SliceSpec {
        input: &args.manifest,
        out: &args.out,
        limits,
        pad,
        seed: args.seed,
        format: if args.float {
            SampleFormat::Float32
        } else {
            args.format
        },
        channels: args.channels,
        threads: args.threads,
    };
    let progress = super::progress::ClipProgress::new();
    let result = slice::slice(&spec, &|e| progress.on_event(e));
    progress.finish();
    match result {
        Err(e) => {
            eprintln!("retake: {e}");
            // An output over the input is a command line to change; the rest could not run.
            if matches!(e, retake::run::RunError::WouldOverwrite(_)) {
                Exit::Usage.into()
            } else {
                Exit::Failed.into()
            }
        }
        Ok(summary) => {
            print_summary(&summary, &args.out);
            if summary.rejected > 0 || summary.left_out > 0 {
                Exit::DoneWithRejects.into()
            } else {
                Exit::Done.into()
            }
        }
    }
}

fn print_summary(s: &SliceSummary, out: &Path) {
    let stretches = if s.left_out == 1 {
        "stretch"
    } else {
        "stretches"
    };
    println!(
        "{} clips in, {} slices out ({:.3} h of audio), {:.3} h of speech kept, {} {stretches} \
         left out ({:.1} s of speech), {} rejected; {:.1} s",
        s.clips_in,
        s.slices,
        s.seconds_out / 3600.0,
        s.speech_kept / 3600.0,
        s.left_out,
        s.speech_left_out,
        s.rejected,
        s.wall_seconds
    );
    println!("output    {}", out.join(MANIFEST_NAME).display());
    if s.left_out > 0 {
        println!("left out  {}", out.join(LEFT_OUT_NAME).display());
    }
    if s.rejected > 0 {
        println!("rejects   {}", out.join(REJECTS_NAME).display());
    }
}

#[cfg(test)]
mod tests {
    use super::parse_pad;

    #[test]
    fn pad_is_a_value_or_a_range() {
        assert_eq!(parse_pad("0.2"), Ok((0.2, 0.2)));
        assert_eq!(parse_pad("0.05..0.4"), Ok((0.05, 0.4)));
        assert!(parse_pad("0.1..").is_err());
        assert!(parse_pad("wide").is_err());
    }
}
