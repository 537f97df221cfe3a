//! `--params FILE.toml`: parameters of any command from a file, e.g.
//!
//! ```toml
//! diameter = "9um"
//! max_gap = 1
//! divisions = "off"
//! no_movie = true
//! ```
//!
//! Keys are the command's long options (`_` or `-`); flags given on the command line win over
//! the file. Unknown keys are refused before any work, with the closest valid key suggested.

use caravan::{Error, Result};
use clap::CommandFactory;
use std::ffi::OsString;
use std::path::{Path, PathBuf};

/// Replaces `--params FILE` in `args` by the file's settings, placed right after the
/// subcommand so that options given later on the command line override them.
///
/// # Errors
/// An unreadable or malformed file, a key that is not an option of the command (with a
/// suggestion), or a value of the wrong kind.
pub fn expand(args: Vec<OsString>) -> Result<Vec<OsString>> {
    let Some(at) = args
        .iter()
        .position(|a| a == "--params" || a.to_string_lossy().starts_with("--params="))
    else {
        return Ok(args);
    };
    let mut args = args;
    let flag = args.remove(at).to_string_lossy().into_owned();
    let path = match flag.strip_prefix("--params=") {
        Some(p) => PathBuf::from(p),
        None if at < args.len() => PathBuf::from(args.remove(at)),
        None => return Err(Error::parameter("--params", "", "needs a file name")),
    };
    let Some(subcommand) = args.get(1).map(|s| s.to_string_lossy().into_owned()) else {
        return Err(Error::parameter(
            "--params",
            path.display(),
            "give a command first, e.g. caravan track --params FILE",
        ));
    };
    let settings = settings_for(&path, &subcommand)?;
    let mut out: Vec<OsString> = args[..2].to_vec();
    out.extend(settings.into_iter().map(OsString::from));
    out.extend(args[2..].iter().cloned());
    Ok(out)
}

/// The options a command accepts: long name and whether it takes a value.
fn options_of(subcommand: &str) -> Option<Vec<(String, bool)>> {
    let cmd = super::Cli::command();
    let sub = cmd.find_subcommand(subcommand)?;
    Some(
        sub.get_arguments()
            .filter_map(|a| {
                let long = a.get_long()?.to_string();
                Some((long, a.get_action().takes_values()))
            })
            .filter(|(l, _)| l != "help" && l != "params")
            .collect(),
    )
}

fn settings_for(path: &Path, subcommand: &str) -> Result<Vec<String>> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::input(path, e.to_string()))?;
    let table: toml::Table = text
        .parse()
        .map_err(|e: toml::de::Error| Error::input(path, format!("not valid TOML: {}", e.message())))?;
    let Some(options) = options_of(subcommand) else {
        return Err(Error::parameter(
            "--params",
            path.display(),
            format!("{subcommand:?} is not a command"),
        ));
    };
    let mut out = Vec::new();
    for (key, value) in &table {
        let name = key.replace('_', "-");
        let Some((_, takes_value)) = options.iter().find(|(l, _)| *l == name) else {
            let closest = options.iter().map(|(l, _)| l).min_by_key(|l| edit_distance(&name, l));
            let hint = closest
                .map(|c| format!("; did you mean {:?}?", c.replace('-', "_")))
                .unwrap_or_default();
            return Err(Error::input(
                path,
                format!("unknown key {key:?} for caravan {subcommand}{hint}"),
            ));
        };
        let text = match value {
            toml::Value::String(s) => s.clone(),
            toml::Value::Integer(i) => i.to_string(),
            toml::Value::Float(f) => f.to_string(),
            toml::Value::Boolean(b) if !takes_value => {
                if *b {
                    out.push(format!("--{name}"));
                }
                continue;
            }
            _ => {
                return Err(Error::input(
                    path,
                    format!("key {key:?}: expected a string or a number"),
                ))
            }
        };
        if !takes_value {
            return Err(Error::input(
                path,
                format!("key {key:?} is a switch: write {key} = true"),
            ));
        }
        out.push(format!("--{name}"));
        out.push(text);
    }
    Ok(out)
}

/// Levenshtein distance (V. I. Levenshtein (1966), Soviet Physics Doklady 10(8):707–710), for
/// suggesting the intended key.
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut previous = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let substitution = previous + usize::from(ca != cb);
            previous = row[j + 1];
            row[j + 1] = substitution.min(row[j] + 1).min(previous + 1);
        }
    }
    row[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edit_distances_and_suggestions() {
        // Textbook values: kitten → sitting is 3 (Levenshtein's example as usually quoted).
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("p.toml");
        std::fs::write(&p, "dimater = \"14px\"\n").unwrap();
        let e = settings_for(&p, "track").unwrap_err().to_string();
        assert!(
            e.contains("unknown key \"dimater\"") && e.contains("did you mean \"diameter\""),
            "{e}"
        );
        std::fs::write(
            &p,
            "diameter = \"14px\"\nmax_gap = 1\nno_movie = true\nno_analysis = false\n",
        )
        .unwrap();
        assert_eq!(
            settings_for(&p, "track").unwrap(),
            vec!["--diameter", "14px", "--max-gap", "1", "--no-movie"]
        );
    }
}
