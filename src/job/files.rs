//! Writing a run's files into its output directory and recording each in the manifest:
//! memory images in every format, typed `.npy` arrays, plain files, and one hex image per
//! channel that gathers every input region at its word address.

use crate::error::{Error, Result};
use crate::image::{self, ImageFormat, Segment};
use crate::job::outdir::{OutDir, OutFile};
use crate::layout::Placed;
use crate::manifest::{FileEntry, Role};

/// The files of one run (under `prefix`, `""` or `seed-N/`), with their manifest entries.
pub struct RunFiles<'a> {
    dir: &'a OutDir,
    prefix: &'a str,
    word_bits: u32,
    word_bytes: u64,
    /// Every file written so far, in writing order.
    pub files: Vec<FileEntry>,
    channels: Vec<Option<ChannelImage>>,
}

/// One open per-channel hex image.
struct ChannelImage {
    rel: String,
    out: OutFile,
    end_word: u64,
}

impl<'a> RunFiles<'a> {
    /// Starts the files of a run with `channels` device channels.
    pub fn new(dir: &'a OutDir, prefix: &'a str, word_bits: u32, channels: u32) -> Self {
        RunFiles {
            dir,
            prefix,
            word_bits,
            word_bytes: u64::from(word_bits / 8),
            files: Vec::new(),
            channels: (0..channels).map(|_| None).collect(),
        }
    }

    /// `name` under the run's prefix.
    pub fn rel(&self, name: &str) -> String {
        format!("{}{name}", self.prefix)
    }

    fn io(&self, rel: &str) -> impl Fn(std::io::Error) -> Error + '_ {
        let p = self.dir.shown_path(rel);
        move |e| Error::io(&p, e)
    }

    /// Writes `bytes` as a memory image `stem.{ext}` in every format; `proto` carries the
    /// entry's metadata. With `segment`, the input region the bytes fill, they also go to
    /// its channel's hex image, from the same formatted text as `stem.hex` when hex is one
    /// of the formats.
    pub fn images(
        &mut self,
        stem: &str,
        formats: &[ImageFormat],
        bytes: &[u8],
        proto: &FileEntry,
        segment: Option<&Placed>,
    ) -> Result<()> {
        let wb = self.word_bytes as usize;
        for &f in formats {
            let rel = self.rel(&format!("{stem}.{}", f.ext()));
            let mut out = self.dir.file(&rel)?;
            let words = match segment.filter(|_| f == ImageFormat::Hex) {
                Some(reg) => {
                    let label = reg.id.to_string();
                    let seg = Segment {
                        word_addr: reg.word_addr(self.word_bytes),
                        bytes,
                        label: &label,
                    };
                    let img = self.channel_image(reg)?;
                    image::write_hex_and_segment(&mut out, &mut img.out, wb, &seg)
                }
                None => image::write_image(&mut out, f, wb, bytes),
            }
            .map_err(|e| Error::input(format!("{rel}: {e}")))?;
            let (fbytes, sha) = out.finish().map_err(self.io(&rel))?;
            self.files.push(FileEntry {
                path: rel,
                format: f.ext().into(),
                word_bits: Some(self.word_bits),
                words: Some(words),
                payload_bytes: Some(bytes.len() as u64),
                padding_bytes: Some(words * self.word_bytes - bytes.len() as u64),
                bytes: fbytes,
                sha256: sha,
                ..proto.clone()
            });
        }
        match segment {
            Some(reg) if !formats.contains(&ImageFormat::Hex) => self.channel_segment(reg, bytes),
            _ => Ok(()),
        }
    }

    /// Writes a typed `.npy` array.
    pub fn typed(
        &mut self,
        name: &str,
        descr: &str,
        shape: &[u64],
        data: &[u8],
        proto: &FileEntry,
    ) -> Result<()> {
        let rel = self.rel(name);
        let mut out = self.dir.file(&rel)?;
        crate::npy::write_npy(&mut out, descr, shape, data).map_err(self.io(&rel))?;
        let (fbytes, sha) = out.finish().map_err(self.io(&rel))?;
        self.files.push(FileEntry {
            path: rel,
            format: "npy-typed".into(),
            payload_bytes: Some(data.len() as u64),
            bytes: fbytes,
            sha256: sha,
            ..proto.clone()
        });
        Ok(())
    }

    /// Writes a whole small file (JSON, CSV, Verilog).
    pub fn plain(&mut self, name: &str, role: Role, format: &str, text: &[u8]) -> Result<()> {
        let rel = self.rel(name);
        let (bytes, sha) = self.dir.write_all(&rel, text)?;
        self.files.push(FileEntry {
            path: rel,
            role: Some(role),
            format: format.into(),
            bytes,
            sha256: sha,
            ..FileEntry::default()
        });
        Ok(())
    }

    /// Appends `bytes`, the contents of input region `reg`, to its channel's hex image.
    pub fn channel_segment(&mut self, reg: &Placed, bytes: &[u8]) -> Result<()> {
        let label = reg.id.to_string();
        let seg = Segment {
            word_addr: reg.word_addr(self.word_bytes),
            bytes,
            label: &label,
        };
        let wb = self.word_bytes as usize;
        let img = self.channel_image(reg)?;
        image::write_hex_segments(&mut img.out, wb, &[seg])
            .map_err(|e| Error::input(format!("{}: {e}", img.rel)))?;
        Ok(())
    }

    /// The hex image of `reg`'s channel, opened on first use, with `reg` counted in its
    /// extent.
    fn channel_image(&mut self, reg: &Placed) -> Result<&mut ChannelImage> {
        let ch = reg.channel as usize;
        if self.channels[ch].is_none() {
            let rel = self.rel(&format!("input/ch{ch}.hex"));
            self.channels[ch] = Some(ChannelImage {
                out: self.dir.file(&rel)?,
                rel,
                end_word: 0,
            });
        }
        let wb = self.word_bytes;
        let img = self.channels[ch].as_mut().expect("opened above");
        img.end_word = img.end_word.max(reg.word_addr(wb) + reg.words);
        Ok(img)
    }

    /// Closes the channel images and records them; `table` names the input table when
    /// the job has one.
    pub fn finish_channels(&mut self, table: Option<&str>) -> Result<()> {
        for (ch, img) in std::mem::take(&mut self.channels).into_iter().enumerate() {
            if let Some(img) = img {
                let (bytes, sha) = img.out.finish().map_err(self.io(&img.rel))?;
                self.files.push(FileEntry {
                    path: img.rel,
                    role: Some(Role::Input),
                    format: "hex".into(),
                    table: table.map(str::to_string),
                    channel: Some(ch as u32),
                    base: Some(0),
                    word_bits: Some(self.word_bits),
                    words: Some(img.end_word),
                    bytes,
                    sha256: sha,
                    ..FileEntry::default()
                });
            }
        }
        Ok(())
    }

    /// Writes a file that the manifest does not list (`timing.json`).
    pub fn unlisted(&self, name: &str, text: &[u8]) -> Result<()> {
        self.dir.write_all(&self.rel(name), text).map(|_| ())
    }
}
