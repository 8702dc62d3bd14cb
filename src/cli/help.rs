//! Words around the flags: manual pages for the tool and every command, the nearest command
//! or flag to a typo, and library messages turned into flag wording.

use super::Cli;
use clap::CommandFactory;

/// Every manual page as (file name, roff): `chromasift.1` and one `chromasift-CMD.1` per
/// command, each listing that command's own flags.
pub fn manual_pages() -> Vec<(String, Vec<u8>)> {
    let top = Cli::command();
    let mut pages = Vec::new();
    let mut render = |name: String, cmd: clap::Command| {
        let mut roff = Vec::new();
        clap_mangen::Man::new(cmd)
            .render(&mut roff)
            .expect("rendering into memory");
        pages.push((format!("{name}.1"), roff));
    };
    render("chromasift".into(), top.clone());
    for sub in top.get_subcommands() {
        let name = format!("chromasift-{}", sub.get_name());
        let cmd = sub
            .clone()
            .name(name.clone())
            .version(top.get_version().unwrap_or_default().to_string());
        render(name, cmd);
    }
    pages
}

/// Words people type for a flag this tool spells otherwise, with the flag to use.
const SYNONYMS: &[(&str, &str)] = &[
    ("colors", "-k"),
    ("colours", "-k"),
    ("ncolors", "-k"),
    ("n-colors", "-k"),
    ("n-colours", "-k"),
    ("clusters", "-k"),
    ("classes", "-k"),
    ("output", "-o"),
    ("outdir", "-o"),
    ("output-dir", "-o"),
    ("threads", "--jobs"),
    ("random-state", "--seed"),
    ("n-init", "--restarts"),
    ("iterations", "--max-iter"),
    ("colorspace", "--space"),
    ("colourspace", "--space"),
    ("color-space", "--space"),
    ("colour-space", "--space"),
    ("ink", "--inks"),
    ("band", "--bands"),
];

/// Optimal string alignment distance (Levenshtein with adjacent transpositions).
fn distance(a: &str, b: &str) -> usize {
    let (a, b): (Vec<char>, Vec<char>) = (a.chars().collect(), b.chars().collect());
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in d[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            d[i][j] = (d[i - 1][j] + 1)
                .min(d[i][j - 1] + 1)
                .min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                d[i][j] = d[i][j].min(d[i - 2][j - 2] + 1);
            }
        }
    }
    d[a.len()][b.len()]
}

/// The nearest of `candidates` to `typed` (a command name, or a flag with its dashes),
/// when it is near enough to be a typo: at most 2 edits, and fewer than a third of the
/// longer word's letters. Known synonyms of flags map to the flag this tool uses.
pub fn suggest<'a>(typed: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<String> {
    let bare = typed.trim_start_matches('-').to_ascii_lowercase();
    let bare = bare.split('=').next().unwrap_or_default().to_string();
    let candidates: Vec<&str> = candidates.into_iter().collect();
    if typed.starts_with('-') {
        if let Some((_, flag)) = SYNONYMS.iter().find(|(w, _)| *w == bare) {
            if candidates.contains(flag) {
                return Some((*flag).to_string());
            }
        }
    }
    candidates
        .iter()
        .map(|c| (distance(&bare, c.trim_start_matches('-')), *c))
        .filter(|&(d, c)| {
            d > 0 && d <= 2 && 3 * d < bare.len().max(c.trim_start_matches('-').len())
        })
        .min()
        .map(|(_, c)| c.to_string())
}

/// The names a typo of a command is compared with.
pub(super) fn command_names() -> Vec<String> {
    Cli::command()
        .get_subcommands()
        .map(|s| s.get_name().to_string())
        .collect()
}

/// Every flag of a command (`--long` and `-s`), for typo suggestions.
pub(super) fn flags_of(command: Option<&str>) -> Vec<String> {
    let top = Cli::command();
    let cmd = match command.and_then(|c| top.find_subcommand(c)) {
        Some(c) => c.clone(),
        None => top,
    };
    let mut out = vec!["--help".to_string()];
    for a in cmd.get_arguments() {
        if let Some(l) = a.get_long() {
            out.push(format!("--{l}"));
        }
        if let Some(s) = a.get_short() {
            out.push(format!("-{s}"));
        }
    }
    out
}

/// A library message in flag wording: each setting named in backquotes (`k_max`) becomes
/// the flag that sets it (--k-max).
pub fn flag_wording(message: &str) -> String {
    let mut out = String::with_capacity(message.len());
    let mut rest = message;
    while let Some(open) = rest.find('`') {
        let after = &rest[open + 1..];
        match after.find('`') {
            Some(close)
                if close > 0
                    && after[..close]
                        .chars()
                        .all(|c| c.is_ascii_lowercase() || c == '_' || c.is_ascii_digit()) =>
            {
                out.push_str(&rest[..open]);
                out.push_str(&flag_of(&after[..close]));
                rest = &after[close + 1..];
            }
            _ => {
                out.push_str(&rest[..open + 1]);
                rest = after;
            }
        }
    }
    out.push_str(rest);
    out
}

/// The flag that sets a library setting.
fn flag_of(setting: &str) -> String {
    match setting {
        "k" => "-k".into(),
        "use_inks" => "--use".into(),
        "target_delta_e" => "--target-delta-e".into(),
        other => format!("--{}", other.replace('_', "-")),
    }
}

/// One line from clap's error text: its first line without the `error: ` prefix, and, for
/// a list such as the missing required arguments, the listed items after it.
pub(super) fn usage_error_line(text: &str) -> String {
    let mut lines = text.lines();
    let first = lines.next().unwrap_or("").trim_start_matches("error: ");
    let first = first.trim_end();
    if let Some(head) = first.strip_suffix(':') {
        let items: Vec<&str> = lines
            .take_while(|l| !l.trim().is_empty())
            .map(str::trim)
            .collect();
        if !items.is_empty() {
            return format!("{head}: {}", items.join(", "));
        }
    }
    first.to_string()
}

/// The usage error of a parse, with the nearest command or flag when the user mistyped one.
pub(super) fn usage_error(e: &clap::Error, argv: &[String]) -> String {
    use clap::error::{ContextKind, ContextValue, ErrorKind};
    // A file read while parsing (`--pin-file`) says itself what is wrong with it, naming
    // the file, as the same file given to `apply --palette` would.
    if e.kind() == ErrorKind::ValueValidation {
        if let (Some(ContextValue::String(arg)), Some(source)) =
            (e.get(ContextKind::InvalidArg), std::error::Error::source(e))
        {
            if arg.starts_with("--pin-file") {
                return source.to_string();
            }
        }
    }
    let line = usage_error_line(&e.to_string());
    let invalid = match e
        .get(ContextKind::InvalidSubcommand)
        .or(e.get(ContextKind::InvalidArg))
    {
        Some(ContextValue::String(s)) => s.clone(),
        _ => return format!("{line} (see --help)"),
    };
    let nearest = match e.kind() {
        ErrorKind::InvalidSubcommand => {
            suggest(&invalid, command_names().iter().map(String::as_str))
        }
        ErrorKind::UnknownArgument => {
            let command = argv
                .iter()
                .skip(1)
                .find(|a| !a.starts_with('-'))
                .filter(|c| command_names().contains(c))
                .map(String::as_str);
            suggest(&invalid, flags_of(command).iter().map(String::as_str))
        }
        _ => None,
    };
    match nearest {
        Some(n) => format!("{line}; did you mean '{n}'? (see --help)"),
        None => format!("{line} (see --help)"),
    }
}

/// Parses the command line. Every option that takes a value accepts a negative number as
/// that value: `-k -3` is refused by the option's own rule, not taken for an unknown flag.
pub(super) fn parse(argv: &[std::ffi::OsString]) -> Result<Cli, clap::Error> {
    use clap::FromArgMatches;
    fn negatives(a: clap::Arg) -> clap::Arg {
        if a.get_action().takes_values() && !a.is_positional() {
            a.allow_negative_numbers(true)
        } else {
            a
        }
    }
    let cmd = Cli::command()
        .mut_args(negatives)
        .mut_subcommands(|sub| sub.mut_args(negatives));
    Cli::from_arg_matches(&cmd.try_get_matches_from(argv)?)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn typos_find_the_nearest_command_or_flag() {
        let names = command_names();
        let cmds = names.iter().map(String::as_str);
        assert_eq!(
            suggest("seperate", cmds.clone()).as_deref(),
            Some("separate")
        );
        assert_eq!(suggest("redcue", cmds.clone()).as_deref(), Some("reduce"));
        assert_eq!(
            suggest("landcovr", cmds.clone()).as_deref(),
            Some("landcover")
        );
        assert_eq!(suggest("zebra", cmds), None);
        let flags = flags_of(Some("reduce"));
        let flags = flags.iter().map(String::as_str);
        assert_eq!(suggest("--colors", flags.clone()).as_deref(), Some("-k"));
        assert_eq!(
            suggest("--restart", flags.clone()).as_deref(),
            Some("--restarts")
        );
        assert_eq!(
            suggest("--dihter", flags.clone()).as_deref(),
            Some("--dither")
        );
        assert_eq!(suggest("--colors=6", flags.clone()).as_deref(), Some("-k"));
        assert_eq!(suggest("--frobnicate", flags), None);
    }

    #[test]
    fn settings_become_flags() {
        assert_eq!(
            flag_wording("`k_max` must be between 1 and 9; see `sample` and `k`"),
            "--k-max must be between 1 and 9; see --sample and -k"
        );
        assert_eq!(
            flag_wording("no ink named 'x' (asked for with `use_inks`)"),
            "no ink named 'x' (asked for with --use)"
        );
        // Backquotes around anything else are left alone.
        assert_eq!(
            flag_wording("a `Mixed Case` name and a lone ` tick"),
            "a `Mixed Case` name and a lone ` tick"
        );
    }

    #[test]
    fn every_command_has_its_own_manual_page() {
        let pages = manual_pages();
        let names: Vec<&str> = pages.iter().map(|(n, _)| n.as_str()).collect();
        for c in command_names() {
            assert!(names.contains(&format!("chromasift-{c}.1").as_str()), "{c}");
        }
        let reduce = &pages
            .iter()
            .find(|(n, _)| n == "chromasift-reduce.1")
            .unwrap()
            .1;
        let text = String::from_utf8_lossy(reduce);
        assert!(text.contains("chromasift\\-reduce"), "{text}");
        assert!(text.contains("max\\-iter") && text.contains("target\\-delta\\-e"));
    }
}
