//! The output formats, as one table: format → recipe name, file extension, container
//! (which writer), bit depth. Every place that names or writes a take file asks this table,
//! so a take's name and its content can never disagree.

use super::SampleFormat;

/// Which writer a format goes through.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Container {
    /// RIFF WAVE, through hound.
    Wav,
    /// FLAC (lossless), through flacenc.
    Flac,
}

/// One row of the output-format table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OutputFormat {
    /// The format.
    pub format: SampleFormat,
    /// Its name in a recipe (`format = "..."`).
    pub name: &'static str,
    /// Extension of its files, without the dot.
    pub extension: &'static str,
    /// The writer.
    pub container: Container,
    /// Bits per sample.
    pub bits: u16,
    /// Float samples (else integer PCM).
    pub float: bool,
    /// How it reads in a summary.
    pub label: &'static str,
}

/// Every output format.
pub const OUTPUT_FORMATS: [OutputFormat; 5] = [
    row(
        SampleFormat::Pcm16,
        "pcm16",
        "wav",
        Container::Wav,
        16,
        false,
        "16-bit PCM WAV",
    ),
    row(
        SampleFormat::Pcm24,
        "pcm24",
        "wav",
        Container::Wav,
        24,
        false,
        "24-bit PCM WAV",
    ),
    row(
        SampleFormat::Float32,
        "float32",
        "wav",
        Container::Wav,
        32,
        true,
        "32-bit float WAV",
    ),
    row(
        SampleFormat::Flac16,
        "flac16",
        "flac",
        Container::Flac,
        16,
        false,
        "16-bit FLAC",
    ),
    row(
        SampleFormat::Flac24,
        "flac24",
        "flac",
        Container::Flac,
        24,
        false,
        "24-bit FLAC",
    ),
];

/// The format of stems (the clean and noise parts a step writes beside a take): float, so
/// levels recomputed from them match what was measured.
pub const STEM_FORMAT: SampleFormat = SampleFormat::Float32;

const fn row(
    format: SampleFormat,
    name: &'static str,
    extension: &'static str,
    container: Container,
    bits: u16,
    float: bool,
    label: &'static str,
) -> OutputFormat {
    OutputFormat {
        format,
        name,
        extension,
        container,
        bits,
        float,
        label,
    }
}

impl SampleFormat {
    /// This format's row of [`OUTPUT_FORMATS`].
    pub fn spec(self) -> &'static OutputFormat {
        OUTPUT_FORMATS
            .iter()
            .find(|r| r.format == self)
            .unwrap_or(&OUTPUT_FORMATS[0])
    }

    /// Extension of its files, without the dot.
    pub fn extension(self) -> &'static str {
        self.spec().extension
    }

    /// The format a recipe names.
    pub fn from_name(name: &str) -> Option<Self> {
        OUTPUT_FORMATS
            .iter()
            .find(|r| r.name == name)
            .map(|r| r.format)
    }

    /// Every recipe name, in table order.
    pub fn names() -> Vec<&'static str> {
        OUTPUT_FORMATS.iter().map(|r| r.name).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_format_has_one_row_and_its_name_reads_back() {
        for f in [
            SampleFormat::Pcm16,
            SampleFormat::Pcm24,
            SampleFormat::Float32,
            SampleFormat::Flac16,
            SampleFormat::Flac24,
        ] {
            assert_eq!(OUTPUT_FORMATS.iter().filter(|r| r.format == f).count(), 1);
            assert_eq!(SampleFormat::from_name(f.spec().name), Some(f));
            // The serde name (manifests, completion records) is the recipe name.
            assert_eq!(
                serde_json::to_value(f).unwrap(),
                serde_json::Value::from(f.spec().name)
            );
        }
        assert_eq!(SampleFormat::from_name("flac"), None);
    }
}
