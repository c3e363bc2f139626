//! What `vet` and `score` share: the CSV header choice, the input path and entry point the
//! firmware uses, and loading rows for that path with the options' names in the errors.
use anyhow::Result;
use kinglet_converter::dataset::{DatasetError, LabelColumn, LoadOptions, RowStream};
use kinglet_converter::output_guard::Named;
use kinglet_converter::score::{load_rows, Entry, Feed, Rows};
use std::path::PathBuf;

/// Whether the CSV's first row is a header.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum Header {
    /// Detect: a header when a field of the first row is not a number.
    Auto,
    /// The first row is a header.
    Yes,
    /// There is no header.
    No,
}

/// The runtime input type the rows go through.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum FeedArg {
    /// Float features, `Input::F32`.
    F32,
    /// Raw signed 16-bit counts, `Input::I16`: every value a whole number from -32768 to 32767.
    I16,
    /// Raw bytes such as pixels, `Input::U8`: every value a whole number from 0 to 255.
    U8,
}

impl From<FeedArg> for Feed {
    fn from(f: FeedArg) -> Self {
        match f {
            FeedArg::F32 => Feed::F32,
            FeedArg::I16 => Feed::I16,
            FeedArg::U8 => Feed::U8,
        }
    }
}

/// The runtime entry point that gives the class.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum EntryArg {
    /// `Model::infer`: scores, and the argmax of the scores.
    Infer,
    /// `Model::classify`: the class alone (integer argmax of the int8 outputs).
    Classify,
}

impl From<EntryArg> for Entry {
    fn from(e: EntryArg) -> Self {
        match e {
            EntryArg::Infer => Entry::Infer,
            EntryArg::Classify => Entry::Classify,
        }
    }
}

/// Where the rows are, how to read them, and the firmware's input path and entry point: the
/// options `vet` and `score` share.
#[derive(Debug, clap::Args)]
pub struct RowArgs {
    /// Rows to run: CSV (features, optionally a label column), or `.npy` features.
    #[arg(long, value_name = "FILE")]
    pub data: PathBuf,
    /// The CSV label column (header name or 0-based index). Labels are class indices or the
    /// class names stored in the blob.
    #[arg(long, value_name = "COLUMN")]
    pub label: Option<LabelColumn>,
    /// Labels for `.npy` features: a 1-D `.npy` array of class indices or names.
    #[arg(long, value_name = "FILE")]
    pub label_file: Option<PathBuf>,
    /// Whether the CSV's first row is a header.
    #[arg(long, value_enum, default_value = "auto")]
    pub header: Header,
    /// The input type the firmware feeds the int8 or f32 blob (for i16 and u8 every value
    /// must be a whole number in the type's range); a float model compared with it gets the
    /// same values as f32.
    #[arg(long, value_enum, default_value = "f32")]
    pub feed: FeedArg,
    /// The runtime call that gives the blob's class (scores are always `Model::infer`'s, and
    /// a float model compared with it always uses `Model::infer`).
    #[arg(long, value_enum, default_value = "infer")]
    pub entry: EntryArg,
}

impl RowArgs {
    /// The files these options read, named as the user gave them, for the output guard.
    pub fn inputs(&self) -> Vec<Named<'_>> {
        let mut inputs = vec![Named::new("--data", &self.data)];
        if let Some(p) = &self.label_file {
            inputs.push(Named::new("--label-file", p));
        }
        inputs
    }
}

fn options(s: &RowArgs) -> LoadOptions {
    let has_header = match s.header {
        Header::Auto => None,
        Header::Yes => Some(true),
        Header::No => Some(false),
    };
    LoadOptions {
        label: s.label.clone(),
        has_header,
        label_file: s.label_file.clone(),
    }
}

/// Loads the rows for the chosen input type.
pub fn load(s: &RowArgs) -> Result<Rows> {
    let spinner = super::progress::loading(&s.data);
    let loaded = load_rows(&s.data, &options(s), s.feed.into());
    spinner.finish_and_clear();
    loaded.map_err(named)
}

/// Opens the rows to be read a chunk at a time (the f32 input type; a CSV file is read whole
/// here, with the spinner).
pub fn open_stream(s: &RowArgs) -> Result<RowStream> {
    let spinner = super::progress::loading(&s.data);
    let opened = RowStream::open(&s.data, &options(s));
    spinner.finish_and_clear();
    opened.map_err(named)
}

/// A loader error with the option it concerns named.
fn named(e: DatasetError) -> anyhow::Error {
    match e {
        DatasetError::LabelColumnForNpy { .. } => anyhow::Error::new(e).context(
            "--label names a CSV column (for .npy features give --label-file <labels.npy>)",
        ),
        DatasetError::LabelFileForCsv { .. } => anyhow::Error::new(e).context("--label-file"),
        e => e.into(),
    }
}
