//! A folder of single-frame TIFF files, taken in natural numeric order (`t2` before `t10`).

use super::tiff_file::TiffStack;
use super::{io_reason, Frame, OpenOptions, StackInfo};
use crate::error::{Error, Result};
use std::cmp::Ordering;
use std::path::{Path, PathBuf};

/// An open folder of frames.
pub struct FolderStack {
    info: StackInfo,
    files: Vec<PathBuf>,
    options: OpenOptions,
}

impl FolderStack {
    /// Lists the folder's `.tif`/`.tiff` files in natural order and checks that each holds one
    /// frame of the same size and type as the first.
    pub fn open(path: &Path, options: &OpenOptions) -> Result<FolderStack> {
        let files = list_tiffs(path)?;
        let first = TiffStack::open(&files[0], options)?;
        let mut info = first.info().clone();
        let mut bytes = 0;
        for (t, file) in files.iter().enumerate() {
            let s = TiffStack::open(file, options)?;
            let i = s.info();
            if i.frames != 1 {
                return Err(Error::input(
                    file,
                    format!("holds {} frames; a folder of frames needs one frame per file", i.frames),
                ));
            }
            if (i.width, i.height, i.sample_type) != (info.width, info.height, info.sample_type) {
                return Err(Error::input_at(
                    path,
                    t,
                    format!(
                        "{} is {}x{} {:?} but the first file is {}x{} {:?}",
                        file.display(),
                        i.width,
                        i.height,
                        i.sample_type,
                        info.width,
                        info.height,
                        info.sample_type
                    ),
                ));
            }
            bytes += i.bytes_on_disk;
        }
        info.path = path.to_path_buf();
        info.container = "folder".into();
        info.frames = files.len();
        info.bytes_on_disk = bytes;
        Ok(FolderStack {
            info,
            files,
            options: options.clone(),
        })
    }

    /// What the folder holds.
    pub fn info(&self) -> &StackInfo {
        &self.info
    }

    /// Decodes the file of frame `t`.
    pub fn read_frame(&mut self, t: usize) -> Result<Frame> {
        let mut frame = TiffStack::open(&self.files[t], &self.options)?.read_frame(0)?;
        frame.index = t;
        Ok(frame)
    }
}

fn list_tiffs(path: &Path) -> Result<Vec<PathBuf>> {
    let entries =
        std::fs::read_dir(path).map_err(|e| Error::input(path, format!("cannot list folder: {}", io_reason(&e))))?;
    let mut files: Vec<PathBuf> = entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_file() && is_tiff_name(p))
        .collect();
    if files.is_empty() {
        return Err(Error::input(path, "holds no .tif or .tiff files"));
    }
    files.sort_by(|a, b| {
        natural_cmp(
            &a.file_name().unwrap_or_default().to_string_lossy(),
            &b.file_name().unwrap_or_default().to_string_lossy(),
        )
    });
    Ok(files)
}

fn is_tiff_name(p: &Path) -> bool {
    let hidden = p
        .file_name()
        .map(|n| n.to_string_lossy().starts_with('.'))
        .unwrap_or(true);
    let ext = p.extension().map(|e| e.to_string_lossy().to_ascii_lowercase());
    !hidden && matches!(ext.as_deref(), Some("tif" | "tiff"))
}

/// Compares names so that runs of digits compare by value: `t2` < `t10`, `a9b` < `a10b`.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (mut x, mut y) = (a.as_bytes(), b.as_bytes());
    loop {
        match (x.first(), y.first()) {
            (None, None) => return a.cmp(b),
            (None, _) => return Ordering::Less,
            (_, None) => return Ordering::Greater,
            (Some(p), Some(q)) if p.is_ascii_digit() && q.is_ascii_digit() => {
                let (dx, rx) = split_digits(x);
                let (dy, ry) = split_digits(y);
                let (tx, ty) = (trim_zeros(dx), trim_zeros(dy));
                let ord = tx.len().cmp(&ty.len()).then_with(|| tx.cmp(ty));
                if ord != Ordering::Equal {
                    return ord;
                }
                x = rx;
                y = ry;
            }
            (Some(p), Some(q)) => {
                if p != q {
                    return p.cmp(q);
                }
                x = &x[1..];
                y = &y[1..];
            }
        }
    }
}

fn split_digits(s: &[u8]) -> (&[u8], &[u8]) {
    let n = s.iter().take_while(|c| c.is_ascii_digit()).count();
    s.split_at(n)
}

fn trim_zeros(s: &[u8]) -> &[u8] {
    let n = s.iter().take_while(|&&c| c == b'0').count();
    &s[n.min(s.len().saturating_sub(1))..]
}

#[cfg(test)]
mod tests {
    use super::natural_cmp;

    #[test]
    fn natural_order_puts_t2_before_t10() {
        let mut names = vec!["t10.tif", "t2.tif", "t1.tif", "t002b.tif", "t100.tif", "s5.tif"];
        names.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(
            names,
            vec!["s5.tif", "t1.tif", "t2.tif", "t002b.tif", "t10.tif", "t100.tif"]
        );
    }
}
