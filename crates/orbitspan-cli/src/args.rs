//! The command line: subcommands, their options and help texts.
//!
//! A small hand-written parser: `--name VALUE` or `--name=VALUE`, `--` ends
//! the options, everything else is an image path. Values are checked for
//! form here (a size is `AxB`, a count is a whole number); whether they fit
//! the images is for the core to judge.

use crate::failure::CliError;
use orbitspan_core::plane_group::PlaneGroup;
use orbitspan_core::{BandSpec, FitSettings};
use std::ffi::OsString;
use std::path::PathBuf;

/// Default per-image limit for `--max-megapixels` (the core's default).
pub const DEFAULT_MAX_MEGAPIXELS: f64 = 64.0;

/// One parsed command line.
#[derive(Debug, PartialEq)]
pub enum Command {
    Fit(FitArgs),
    Apply(ApplyArgs),
    Demo(DemoArgs),
    Detect(DetectArgs),
    Survey(SurveyArgs),
    /// Print this help text to standard output and exit 0.
    Help(&'static str),
    Version,
}

/// Where the images come from and how they become a stack.
#[derive(Debug, PartialEq)]
pub struct InputArgs {
    pub images: Vec<PathBuf>,
    /// Cut each image into tiles of `[rows, columns]`, dropping partial tiles.
    pub tile: Option<[usize; 2]>,
    /// Refuse images whose header declares more than this many megapixels.
    pub max_megapixels: f64,
}

/// `orbitspan fit`.
#[derive(Debug, PartialEq)]
pub struct FitArgs {
    pub group: PlaneGroup,
    /// `[rows, columns]` of the cell; `None` means the whole image.
    pub cell: Option<[usize; 2]>,
    pub origin: [usize; 2],
    pub generators: usize,
    pub band: Option<BandSpec>,
    pub lattice_coords: bool,
    pub input: InputArgs,
    pub out: Option<PathBuf>,
    pub report: Option<PathBuf>,
    /// A measured lattice: resample onto it before fitting.
    pub lattice: Option<LatticeArg>,
    /// Samples per cell side on the resampled grid (default: about one per pixel).
    pub samples: Option<usize>,
}

/// `--lattice detect` or `--lattice R1,C1,R2,C2` (two vectors in pixels).
#[derive(Debug, PartialEq, Clone, Copy)]
pub enum LatticeArg {
    Detect,
    Vectors([[f64; 2]; 2]),
}

/// `orbitspan detect`.
#[derive(Debug, PartialEq)]
pub struct DetectArgs {
    pub input: InputArgs,
    pub report: Option<PathBuf>,
}

/// `orbitspan survey`.
#[derive(Debug, PartialEq)]
pub struct SurveyArgs {
    pub lattice: LatticeArg,
    pub samples: Option<usize>,
    pub generators: usize,
    pub input: InputArgs,
    pub report: Option<PathBuf>,
}

impl FitArgs {
    /// The core settings for images of `height x width` pixels.
    pub fn settings(&self, height: usize, width: usize) -> FitSettings {
        let [cell_rows, cell_cols] = self.cell.unwrap_or([height, width]);
        FitSettings {
            group: self.group,
            cell_rows,
            cell_cols,
            origin: self.origin,
            generators: self.generators,
            band: self.band,
            lattice_coords: self.lattice_coords,
        }
    }
}

/// `orbitspan apply`.
#[derive(Debug, PartialEq)]
pub struct ApplyArgs {
    pub model: PathBuf,
    pub input: InputArgs,
    pub out: PathBuf,
    pub report: Option<PathBuf>,
}

/// `orbitspan demo`.
#[derive(Debug, PartialEq)]
pub struct DemoArgs {
    pub out: PathBuf,
}

pub const MAIN_HELP: &str = "\
orbitspan: fit a small group-invariant model to a stack of images

Usage:
  orbitspan fit [OPTIONS] IMAGES...     fit a model and print the error curve
  orbitspan apply --model FILE IMAGES... --out DIR
                                        apply a saved model to new images
  orbitspan demo --out DIR              write the invented example stacks
  orbitspan detect IMAGES...            measure the lattice from the spectrum
  orbitspan survey [OPTIONS] IMAGES...  rank the plane groups the lattice allows
  orbitspan --version

Run `orbitspan <command> --help` for the options of one command.
Exit codes: 0 success, 2 bad usage or bad input, 1 internal error.
";

pub const FIT_HELP: &str = "\
orbitspan fit: fit the best model with L generators to a stack of images

Usage: orbitspan fit --group G --generators L [OPTIONS] IMAGES...

The model is the space spanned by L generator images together with their
lattice translates and their images under the plane group; the fit is the one
with least total squared error over the stack. Images are PNG, JPEG or TIFF
(8/16-bit, 32-bit float, multi-page); integer values are scaled to [0, 1] and
colour is turned into luminance (Rec. 709 weights).

Options:
  --group G               plane group: p1 p2 pm pg cm pmm pmg pgg cmm p4 p4m p4g
                          p3 p3m1 p31m p6 p6m; add ':ba' for the setting with the
                          two axes exchanged (e.g. pmg:ba)          (required)
  --generators L          largest number of generators; the error curve covers
                          1..=L                                     (required)
  --cell AxB              unit cell of A rows by B columns of pixels; A must
                          divide the image height and B the width
                          (default: the whole image)
  --origin R,C            pixel (row, column) at the origin of the group
                          (default: 0,0)
  --band-frequencies M    restrict to the symmetric set of at most M
                          frequencies that keeps the most energy
  --band-radius R         restrict to frequencies within radius R (cycles per
                          image); give at most one of the two band options
  --lattice-coords        the images are already sampled in lattice
                          coordinates (needed for p3, p3m1, p31m, p6, p6m)
  --tile HxW              cut each image into tiles of H rows by W columns,
                          dropping partial tiles, and fit the tiles
  --lattice detect|R1,C1,R2,C2
                          the lattice is not on the pixel grid: measure it from
                          the images' spectrum, or give two lattice vectors in
                          pixels (row, column components); the images are
                          resampled onto a grid along the lattice vectors, the
                          symmetry centre is found, and the fit runs there
                          (--cell, --origin and --lattice-coords then do not
                          apply; arrays are written in grid coordinates)
  --samples S             with --lattice: samples per cell side (default: about
                          one per pixel)
  --max-megapixels N      refuse images larger than N megapixels (default: 64)
  --out DIR               write generators.npy, approximations.npy,
                          residuals.npy, PNG pictures, the model file
                          (model.orbitspan-model) and report.json into DIR
  --report FILE           write report.json to FILE
  -h, --help              print this help

Output: the error curve (generators, error, relative error, PSNR, and the
share of the total energy each generator captures) and the per-image errors. The error is the sum over the stack of squared pixel
differences; PSNR = 10 log10(N * H * W * peak^2 / error) in dB over the whole
stack of N images of H x W pixels, with peak 1.0.
";

pub const APPLY_HELP: &str = "\
orbitspan apply: apply a saved model to images of the same size

Usage: orbitspan apply --model FILE --out DIR [OPTIONS] IMAGES...

Options:
  --model FILE            model file written by `orbitspan fit --out`
                          (required)
  --out DIR               write approximations.npy, residuals.npy, PNG pictures
                          and report.json into DIR (required)
  --report FILE           also write report.json to FILE
  --tile HxW              cut each image into tiles of H rows by W columns
  --max-megapixels N      refuse images larger than N megapixels (default: 64)
  -h, --help              print this help

Output: the per-image errors ||f - P f||^2 of each image f against the model
space, with its energy and relative error, and the total.
";

pub const DETECT_HELP: &str = "\
orbitspan detect: measure the lattice of a stack from its power spectrum

Usage: orbitspan detect [OPTIONS] IMAGES...

Finds the peaks of the stack's mean windowed power spectrum, refines them to
sub-bin precision, fits two lattice vectors by least squares over all peaks,
reduces them and names the lattice type (oblique, rectangular, centred
rectangular, square, hexagonal).

Options:
  --report FILE           write the result as JSON
  --tile HxW              cut each image into tiles of H rows by W columns
  --max-megapixels N      refuse images larger than N megapixels (default: 64)
  -h, --help              print this help
";

pub const SURVEY_HELP: &str = "\
orbitspan survey: rank the plane groups that the stack's lattice allows

Usage: orbitspan survey [OPTIONS] IMAGES...

For every plane group the lattice type allows, resamples the stack onto the
lattice, finds the best symmetry centre and reports the deviation D: the
relative distance between the images (mean removed) and their average over
the group, 0 for exact symmetry. Also the relative fit error with L
generators. A low D suggests the group; it is not a proof (noise never
reaches 0, and a subgroup of a fitting group fits at least as well).

Options:
  --lattice detect|R1,C1,R2,C2
                          measure the lattice (default) or give two vectors
  --samples S             samples per cell side (default: about one per pixel)
  --generators L          generators for the fit-error column (default: 1)
  --report FILE           write the ranked table as JSON
  --tile HxW              cut each image into tiles of H rows by W columns
  --max-megapixels N      refuse images larger than N megapixels (default: 64)
  -h, --help              print this help
";

pub const DEMO_HELP: &str = "\
orbitspan demo: write the invented example stacks

Usage: orbitspan demo --out DIR

Writes each example stack as 16-bit greyscale PNG files into DIR/<name>/,
with settings.json (the suggested fit settings and arguments) and README.txt.

Options:
  --out DIR               folder to write into (required)
  -h, --help              print this help
";

/// Parses the arguments after the program name.
pub fn parse(args: Vec<OsString>) -> Result<Command, CliError> {
    let mut tokens = Tokens::new(args);
    let Some(first) = tokens.next() else {
        return Err(CliError::usage("no command given", MAIN_HELP));
    };
    match first {
        Token::Option { name, .. } if name == "help" || name == "h" => Ok(Command::Help(MAIN_HELP)),
        Token::Option { name, .. } if name == "version" || name == "V" => Ok(Command::Version),
        Token::Option { name, .. } => Err(CliError::usage(format!("unknown option '{}'", dashed(&name)), MAIN_HELP)),
        Token::Positional(word) => match word.to_str() {
            Some("fit") => parse_fit(tokens),
            Some("apply") => parse_apply(tokens),
            Some("demo") => parse_demo(tokens),
            Some("detect") => parse_detect(tokens),
            Some("survey") => parse_survey(tokens),
            Some("help") => Ok(Command::Help(MAIN_HELP)),
            _ => Err(CliError::usage(
                format!("unknown command '{}'; use fit, apply, demo, detect or survey", word.to_string_lossy()),
                MAIN_HELP,
            )),
        },
    }
}

fn parse_fit(mut tokens: Tokens) -> Result<Command, CliError> {
    let help = FIT_HELP;
    let mut group = None;
    let mut generators = None;
    let mut cell = None;
    let mut origin = [0, 0];
    let mut band = None;
    let mut lattice_coords = false;
    let mut input = InputBuilder::default();
    let mut out = None;
    let mut report = None;
    let mut lattice = None;
    let mut samples = None;
    while let Some(token) = tokens.next() {
        let (name, inline) = match token {
            Token::Positional(path) => {
                input.images.push(PathBuf::from(path));
                continue;
            }
            Token::Option { name, inline } => (name, inline),
        };
        match name.as_str() {
            "h" | "help" => return Ok(Command::Help(help)),
            "lattice" => lattice = Some(parse_lattice(&tokens.value(&name, inline, help)?, help)?),
            "samples" => samples = Some(parse_count(&name, &tokens.value(&name, inline, help)?, help)?),
            "group" => {
                let text = tokens.value(&name, inline, help)?;
                group = Some(PlaneGroup::parse(&text).map_err(|e| CliError::usage(e.to_string(), help))?);
            }
            "generators" => generators = Some(parse_count(&name, &tokens.value(&name, inline, help)?, help)?),
            "cell" => cell = Some(parse_size(&name, &tokens.value(&name, inline, help)?, help)?),
            "origin" => origin = parse_origin(&tokens.value(&name, inline, help)?, help)?,
            "band-frequencies" | "band-radius" => {
                let text = tokens.value(&name, inline, help)?;
                if band.is_some() {
                    return Err(CliError::usage(
                        "give at most one of --band-frequencies and --band-radius, once",
                        help,
                    ));
                }
                band = Some(if name == "band-frequencies" {
                    BandSpec::Frequencies(parse_count(&name, &text, help)?)
                } else {
                    BandSpec::Radius(parse_radius(&text, help)?)
                });
            }
            "lattice-coords" => {
                no_value(&name, inline, help)?;
                lattice_coords = true;
            }
            "tile" | "max-megapixels" => input.option(&name, tokens.value(&name, inline, help)?, help)?,
            "out" => out = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
            "report" => report = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
            _ => return Err(unknown_option(&name, help)),
        }
    }
    let group = group.ok_or_else(|| CliError::usage("--group is required (e.g. --group p4m)", help))?;
    let generators =
        generators.ok_or_else(|| CliError::usage("--generators is required (e.g. --generators 4)", help))?;
    Ok(Command::Fit(FitArgs {
        group,
        cell,
        origin,
        generators,
        band,
        lattice_coords,
        input: input.finish(help)?,
        out,
        report,
        lattice,
        samples,
    }))
}

fn parse_detect(mut tokens: Tokens) -> Result<Command, CliError> {
    let help = DETECT_HELP;
    let mut input = InputBuilder::default();
    let mut report = None;
    while let Some(token) = tokens.next() {
        match token {
            Token::Positional(path) => input.images.push(PathBuf::from(path)),
            Token::Option { name, inline } => match name.as_str() {
                "h" | "help" => return Ok(Command::Help(help)),
                "report" => report = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
                "tile" | "max-megapixels" => input.option(&name, tokens.value(&name, inline, help)?, help)?,
                _ => return Err(unknown_option(&name, help)),
            },
        }
    }
    Ok(Command::Detect(DetectArgs { input: input.finish(help)?, report }))
}

fn parse_survey(mut tokens: Tokens) -> Result<Command, CliError> {
    let help = SURVEY_HELP;
    let mut input = InputBuilder::default();
    let mut report = None;
    let mut lattice = LatticeArg::Detect;
    let mut samples = None;
    let mut generators = 1;
    while let Some(token) = tokens.next() {
        match token {
            Token::Positional(path) => input.images.push(PathBuf::from(path)),
            Token::Option { name, inline } => match name.as_str() {
                "h" | "help" => return Ok(Command::Help(help)),
                "report" => report = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
                "lattice" => lattice = parse_lattice(&tokens.value(&name, inline, help)?, help)?,
                "samples" => samples = Some(parse_count(&name, &tokens.value(&name, inline, help)?, help)?),
                "generators" => generators = parse_count(&name, &tokens.value(&name, inline, help)?, help)?,
                "tile" | "max-megapixels" => input.option(&name, tokens.value(&name, inline, help)?, help)?,
                _ => return Err(unknown_option(&name, help)),
            },
        }
    }
    Ok(Command::Survey(SurveyArgs { lattice, samples, generators, input: input.finish(help)?, report }))
}

/// `detect` or `R1,C1,R2,C2`.
fn parse_lattice(text: &str, help: &'static str) -> Result<LatticeArg, CliError> {
    if text.trim() == "detect" {
        return Ok(LatticeArg::Detect);
    }
    let bad = || {
        CliError::usage(
            format!("--lattice expects 'detect' or four numbers R1,C1,R2,C2 (two vectors in pixels), got '{text}'"),
            help,
        )
    };
    let v: Vec<f64> = text.split(',').map(|t| t.trim().parse::<f64>().map_err(|_| bad())).collect::<Result<_, _>>()?;
    if v.len() != 4 || v.iter().any(|x| !x.is_finite()) {
        return Err(bad());
    }
    Ok(LatticeArg::Vectors([[v[0], v[1]], [v[2], v[3]]]))
}

fn parse_apply(mut tokens: Tokens) -> Result<Command, CliError> {
    let help = APPLY_HELP;
    let mut model = None;
    let mut input = InputBuilder::default();
    let mut out = None;
    let mut report = None;
    while let Some(token) = tokens.next() {
        let (name, inline) = match token {
            Token::Positional(path) => {
                input.images.push(PathBuf::from(path));
                continue;
            }
            Token::Option { name, inline } => (name, inline),
        };
        match name.as_str() {
            "h" | "help" => return Ok(Command::Help(help)),
            "model" => model = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
            "out" => out = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
            "report" => report = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
            "tile" | "max-megapixels" => input.option(&name, tokens.value(&name, inline, help)?, help)?,
            _ => return Err(unknown_option(&name, help)),
        }
    }
    let model = model.ok_or_else(|| CliError::usage("--model FILE is required", help))?;
    let out = out.ok_or_else(|| CliError::usage("--out DIR is required", help))?;
    Ok(Command::Apply(ApplyArgs { model, input: input.finish(help)?, out, report }))
}

fn parse_demo(mut tokens: Tokens) -> Result<Command, CliError> {
    let help = DEMO_HELP;
    let mut out = None;
    while let Some(token) = tokens.next() {
        match token {
            Token::Positional(word) => {
                return Err(CliError::usage(
                    format!("unexpected argument '{}'", word.to_string_lossy()),
                    help,
                ))
            }
            Token::Option { name, inline } => match name.as_str() {
                "h" | "help" => return Ok(Command::Help(help)),
                "out" => out = Some(PathBuf::from(tokens.path_value(&name, inline, help)?)),
                _ => return Err(unknown_option(&name, help)),
            },
        }
    }
    let out = out.ok_or_else(|| CliError::usage("--out DIR is required", help))?;
    Ok(Command::Demo(DemoArgs { out }))
}

/// The command-line arguments that reproduce `settings` with `orbitspan fit`
/// (without the image paths).
pub fn fit_arguments(settings: &FitSettings) -> Vec<String> {
    let mut out = vec![
        "--group".to_string(),
        settings.group.name(),
        "--cell".to_string(),
        format!("{}x{}", settings.cell_rows, settings.cell_cols),
    ];
    if settings.origin != [0, 0] {
        out.push("--origin".to_string());
        out.push(format!("{},{}", settings.origin[0], settings.origin[1]));
    }
    out.push("--generators".to_string());
    out.push(settings.generators.to_string());
    match settings.band {
        Some(BandSpec::Frequencies(m)) => out.extend(["--band-frequencies".to_string(), m.to_string()]),
        Some(BandSpec::Radius(r)) => out.extend(["--band-radius".to_string(), r.to_string()]),
        None => {}
    }
    if settings.lattice_coords {
        out.push("--lattice-coords".to_string());
    }
    out
}

/// Like [`fit_arguments`] for a stack whose lattice must be measured:
/// `--lattice detect --samples S` instead of the cell, origin and
/// lattice-coordinates flag.
pub fn measured_fit_arguments(settings: &FitSettings) -> Vec<String> {
    let mut out = vec!["--group".to_string(), settings.group.name(), "--lattice".into(), "detect".into()];
    out.extend(["--samples".to_string(), settings.cell_rows.to_string()]);
    out.extend(fit_arguments(settings).into_iter().skip_while(|w| w != "--generators").filter(|w| w != "--lattice-coords"));
    out
}

#[derive(Default)]
struct InputBuilder {
    images: Vec<PathBuf>,
    tile: Option<[usize; 2]>,
    max_megapixels: Option<f64>,
}

impl InputBuilder {
    fn option(&mut self, name: &str, value: String, help: &'static str) -> Result<(), CliError> {
        match name {
            "tile" => self.tile = Some(parse_size(name, &value, help)?),
            _ => {
                let mp: f64 = value.trim().parse().map_err(|_| {
                    CliError::usage(format!("--{name} expects a number of megapixels, got '{value}'"), help)
                })?;
                if !(mp.is_finite() && mp > 0.0) {
                    return Err(CliError::usage(format!("--{name} must be a positive number, got '{value}'"), help));
                }
                self.max_megapixels = Some(mp);
            }
        }
        Ok(())
    }
    fn finish(self, help: &'static str) -> Result<InputArgs, CliError> {
        if self.images.is_empty() {
            return Err(CliError::usage("no images given", help));
        }
        Ok(InputArgs {
            images: self.images,
            tile: self.tile,
            max_megapixels: self.max_megapixels.unwrap_or(DEFAULT_MAX_MEGAPIXELS),
        })
    }
}

/// `16x16` -> `[16, 16]` (rows x columns), both at least 1.
fn parse_size(name: &str, text: &str, help: &'static str) -> Result<[usize; 2], CliError> {
    let bad = || CliError::usage(format!("--{name} expects ROWSxCOLUMNS such as 16x16, got '{text}'"), help);
    let (a, b) = text.trim().split_once(['x', 'X']).ok_or_else(bad)?;
    let a: usize = a.trim().parse().map_err(|_| bad())?;
    let b: usize = b.trim().parse().map_err(|_| bad())?;
    if a == 0 || b == 0 {
        return Err(CliError::usage(format!("--{name} must be at least 1x1, got '{text}'"), help));
    }
    Ok([a, b])
}

/// `R,C` -> `[R, C]`.
fn parse_origin(text: &str, help: &'static str) -> Result<[usize; 2], CliError> {
    let bad = || CliError::usage(format!("--origin expects ROW,COLUMN such as 0,0, got '{text}'"), help);
    let (a, b) = text.trim().split_once(',').ok_or_else(bad)?;
    Ok([a.trim().parse().map_err(|_| bad())?, b.trim().parse().map_err(|_| bad())?])
}

fn parse_count(name: &str, text: &str, help: &'static str) -> Result<usize, CliError> {
    text.trim()
        .parse()
        .map_err(|_| CliError::usage(format!("--{name} expects a whole number, got '{text}'"), help))
}

fn parse_radius(text: &str, help: &'static str) -> Result<f64, CliError> {
    match text.trim().parse::<f64>() {
        Ok(r) if r.is_finite() && r >= 0.0 => Ok(r),
        _ => Err(CliError::usage(
            format!("--band-radius expects a non-negative number, got '{text}'"),
            help,
        )),
    }
}

fn no_value(name: &str, inline: Option<OsString>, help: &'static str) -> Result<(), CliError> {
    match inline {
        None => Ok(()),
        Some(_) => Err(CliError::usage(format!("--{name} takes no value"), help)),
    }
}

fn unknown_option(name: &str, help: &'static str) -> CliError {
    CliError::usage(format!("unknown option '{}'", dashed(name)), help)
}

fn dashed(name: &str) -> String {
    if name.chars().count() == 1 {
        format!("-{name}")
    } else {
        format!("--{name}")
    }
}

enum Token {
    /// `--name`, `--name=value` or `-n`.
    Option { name: String, inline: Option<OsString> },
    Positional(OsString),
}

struct Tokens {
    rest: std::vec::IntoIter<OsString>,
    only_positional: bool,
}

impl Tokens {
    fn new(args: Vec<OsString>) -> Self {
        Tokens { rest: args.into_iter(), only_positional: false }
    }

    fn next(&mut self) -> Option<Token> {
        let arg = self.rest.next()?;
        if self.only_positional {
            return Some(Token::Positional(arg));
        }
        let Some(text) = arg.to_str() else {
            // Not valid text: only a path can be like that.
            return Some(Token::Positional(arg));
        };
        if text == "--" {
            self.only_positional = true;
            return self.next();
        }
        if let Some(long) = text.strip_prefix("--") {
            return Some(match long.split_once('=') {
                Some((name, value)) => Token::Option { name: name.to_string(), inline: Some(value.into()) },
                None => Token::Option { name: long.to_string(), inline: None },
            });
        }
        if text.len() > 1 && text.starts_with('-') {
            return Some(Token::Option { name: text[1..].to_string(), inline: None });
        }
        Some(Token::Positional(arg))
    }

    /// The option's value as text: inline (`--x=v`) or the next argument.
    fn value(&mut self, name: &str, inline: Option<OsString>, help: &'static str) -> Result<String, CliError> {
        let raw = self.path_value(name, inline, help)?;
        raw.into_string()
            .map_err(|raw| CliError::usage(format!("--{name}: '{}' is not valid text", raw.to_string_lossy()), help))
    }

    /// The option's value as given (a path may be any bytes).
    fn path_value(&mut self, name: &str, inline: Option<OsString>, help: &'static str) -> Result<OsString, CliError> {
        if let Some(v) = inline {
            return Ok(v);
        }
        match self.rest.next() {
            Some(v) if !(v.to_string_lossy().starts_with("--") && v.len() > 2) => Ok(v),
            _ => Err(CliError::usage(format!("--{name} needs a value"), help)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse_words(words: &str) -> Result<Command, CliError> {
        parse(words.split_whitespace().map(OsString::from).collect())
    }

    fn usage_message(words: &str) -> String {
        match parse_words(words) {
            Err(CliError::Usage { message, .. }) => message,
            other => panic!("expected a usage error for '{words}', got {other:?}"),
        }
    }

    #[test]
    fn fit_options_are_read_in_either_form() {
        let Command::Fit(args) = parse_words(
            "fit --group p4m --cell=16x8 --origin 3,5 --generators 4 --band-radius 2.5 \
             --tile 64x32 --max-megapixels 0.5 --out o --report r.json a.png -- --b.png",
        )
        .unwrap() else {
            panic!("not fit")
        };
        assert_eq!(args.group, PlaneGroup::parse("p4m").unwrap());
        assert_eq!(args.cell, Some([16, 8]));
        assert_eq!(args.origin, [3, 5]);
        assert_eq!(args.generators, 4);
        assert_eq!(args.band, Some(BandSpec::Radius(2.5)));
        assert_eq!(args.input.tile, Some([64, 32]));
        assert_eq!(args.input.max_megapixels, 0.5);
        assert_eq!(args.out, Some(PathBuf::from("o")));
        assert_eq!(args.report, Some(PathBuf::from("r.json")));
        assert_eq!(args.input.images, vec![PathBuf::from("a.png"), PathBuf::from("--b.png")]);
    }

    #[test]
    fn missing_cell_means_the_whole_image() {
        let Command::Fit(args) = parse_words("fit --group p1 --generators 2 a.png").unwrap() else {
            panic!("not fit")
        };
        let s = args.settings(30, 20);
        assert_eq!((s.cell_rows, s.cell_cols, s.origin), (30, 20, [0, 0]));
        assert_eq!(args.input.max_megapixels, DEFAULT_MAX_MEGAPIXELS);
    }

    #[test]
    fn fit_arguments_round_trip_through_the_parser() {
        let settings = FitSettings {
            group: PlaneGroup::parse("pmg:ba").unwrap(),
            cell_rows: 12,
            cell_cols: 10,
            origin: [1, 7],
            generators: 3,
            band: Some(BandSpec::Radius(0.1 + 0.2)),
            lattice_coords: true,
        };
        let mut words: Vec<OsString> = vec!["fit".into()];
        words.extend(fit_arguments(&settings).into_iter().map(OsString::from));
        words.push("x.tif".into());
        let Command::Fit(args) = parse(words).unwrap() else { panic!("not fit") };
        assert_eq!(args.settings(120, 100), settings);
    }

    #[test]
    fn malformed_values_are_usage_errors_naming_the_option() {
        assert!(usage_message("fit --group p4m --generators 2 --cell 16 a.png").contains("--cell"));
        assert!(usage_message("fit --group p4m --generators 2 --cell 0x4 a.png").contains("at least 1x1"));
        assert!(usage_message("fit --group p4m --generators two a.png").contains("--generators"));
        assert!(usage_message("fit --group p5 --generators 2 a.png").contains("p5"));
        assert!(usage_message("fit --group p4m --generators 2 --origin 1;2 a.png").contains("--origin"));
        assert!(usage_message("fit --group p4m --generators 2 --band-radius nan a.png").contains("--band-radius"));
        assert!(usage_message("fit --group p4m --generators 2 --band-radius 1 --band-frequencies 4 a.png")
            .contains("at most one"));
        assert!(usage_message("fit --group p4m --generators 2 --cell").contains("needs a value"));
        assert!(usage_message("fit --group p4m --generators 2 --max-megapixels 0 a.png").contains("positive"));
        assert!(usage_message("fit --group p4m --generators 2 --lattice-coords=yes a.png").contains("no value"));
    }

    #[test]
    fn required_pieces_and_unknown_words_are_reported() {
        assert!(usage_message("fit --generators 2 a.png").contains("--group"));
        assert!(usage_message("fit --group p1 a.png").contains("--generators"));
        assert!(usage_message("fit --group p1 --generators 2").contains("no images"));
        assert!(usage_message("fit --group p1 --generators 2 --colour a.png").contains("'--colour'"));
        assert!(usage_message("apply a.png --out o").contains("--model"));
        assert!(usage_message("apply --model m a.png").contains("--out"));
        assert!(usage_message("demo").contains("--out"));
        assert!(usage_message("demo --out o extra").contains("extra"));
        assert!(usage_message("fitt a.png").contains("fitt"));
        assert!(usage_message("").contains("no command"));
    }

    #[test]
    fn help_and_version() {
        assert_eq!(parse_words("--help").unwrap(), Command::Help(MAIN_HELP));
        assert_eq!(parse_words("fit -h").unwrap(), Command::Help(FIT_HELP));
        assert_eq!(parse_words("apply --help").unwrap(), Command::Help(APPLY_HELP));
        assert_eq!(parse_words("demo --help").unwrap(), Command::Help(DEMO_HELP));
        assert_eq!(parse_words("--version").unwrap(), Command::Version);
    }
}
