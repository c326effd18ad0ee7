//! Which of a launcher's variables a standby must share, which it passes on
//! to its cells, and which do not matter.
//!
//! A standby prepared its engine in the environment it was started in. A
//! front end starts kernels in an environment of its own: a desktop
//! launcher, a terminal and a container each set `LANG`, `TERM`, `SHELL`,
//! `SSL_CERT_FILE` and dozens more their own way. Most of them cannot
//! change what the prepared engine builds; cells may read them, so the
//! standby's cell process takes the launcher's values ([`launcher_setting`]).
//! Only the variables that shape the engine itself must be equal
//! ([`VariableRole::Engine`]); a launcher that differs in one is declined.

use std::collections::{BTreeMap, BTreeSet};

/// What a variable means for a standby taking over a launcher.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum VariableRole {
    /// Shapes the prepared engine, so the launcher's value must equal the
    /// standby's: Plumbline's own settings (`PLUMBLINE_*`: the engine folder,
    /// its optimisation level, the analysis crate), the toolchain and how it
    /// builds (`PATH`, `HOME`, `CARGO*`, `RUSTC*`, `RUSTFLAGS`,
    /// `RUSTDOCFLAGS`, `RUSTUP_*`, `EVCXR_*`), and what a process reads once
    /// at its start — the dynamic loader's and allocator's settings (`LD_*`,
    /// `MALLOC_*`, `GLIBC_TUNABLES`) and the sizes of the worker pools behind
    /// frames (`POLARS_*`, `RAYON_*`).
    Engine,
    /// Set per launch by a front end or shell, or by each engine for itself
    /// (`JPY_*`, `PWD`, `OLDPWD`, `SHLVL`, `_`, the standby switches
    /// `PLUMBLINE_STANDBY*`, [`crate::eval::ENGINE_VARIABLES`]): never compared,
    /// never passed.
    PerLaunch,
    /// Everything else (`LANG`, `LC_*`, `TERM`, `SHELL`, `TZ`, `PG*`, …, and
    /// the memory budget `PLUMBLINE_MEMORY_LIMIT`, read afresh by each load):
    /// cells may read it, so the standby's cell process takes the launcher's
    /// value.
    Cells,
}

/// The role of the variable `name`.
pub fn role(name: &str) -> VariableRole {
    let per_launch = name.starts_with("JPY_")
        || name.starts_with("PLUMBLINE_STANDBY")
        || matches!(name, "_" | "PWD" | "OLDPWD" | "SHLVL")
        || crate::eval::ENGINE_VARIABLES.contains(&name);
    if per_launch {
        return VariableRole::PerLaunch;
    }
    // Read afresh by every load and fit in the cells, so it shapes nothing
    // the engine prepared.
    if name == plumbline::data::MEMORY_LIMIT_VARIABLE {
        return VariableRole::Cells;
    }
    let engine = ["PLUMBLINE_", "CARGO", "RUSTC", "RUSTUP_", "EVCXR_", "LD_", "MALLOC_", "POLARS_", "RAYON_"]
        .iter()
        .any(|prefix| name.starts_with(prefix))
        || matches!(name, "PATH" | "HOME" | "RUSTFLAGS" | "RUSTDOCFLAGS" | "GLIBC_TUNABLES");
    if engine {
        VariableRole::Engine
    } else {
        VariableRole::Cells
    }
}

/// This process's environment (values that are not UTF-8 read lossily).
pub fn environment_now() -> BTreeMap<String, String> {
    std::env::vars_os().map(|(k, v)| (k.to_string_lossy().into_owned(), v.to_string_lossy().into_owned())).collect()
}

/// Names of the variables of `role` whose values differ between two
/// environments (present in one only counts), sorted.
pub fn differences(
    role_wanted: VariableRole,
    ours: &BTreeMap<String, String>,
    theirs: &BTreeMap<String, String>,
) -> Vec<String> {
    let names: BTreeSet<&String> = ours.keys().chain(theirs.keys()).collect();
    names
        .into_iter()
        .filter(|name| role(name) == role_wanted && ours.get(*name) != theirs.get(*name))
        .cloned()
        .collect()
}

/// What the standby's cell process must change to see the launcher's
/// [`VariableRole::Cells`] variables: each differing variable set to the
/// launcher's value (`Some`), or removed (`None`) where the launcher has none.
pub fn launcher_setting(
    standby: &BTreeMap<String, String>,
    launcher: &BTreeMap<String, String>,
) -> Vec<(String, Option<String>)> {
    differences(VariableRole::Cells, standby, launcher)
        .into_iter()
        .map(|name| {
            let value = launcher.get(&name).cloned();
            (name, value)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn environment(pairs: &[(&str, &str)]) -> BTreeMap<String, String> {
        pairs.iter().map(|(k, v)| (k.to_string(), v.to_string())).collect()
    }

    #[test]
    fn engine_variables_are_compared_and_the_rest_passed_to_cells() {
        for name in ["PLUMBLINE_ENGINE_OPT", "PLUMBLINE_ENGINE_DIR", "RUSTFLAGS", "CARGO_HOME", "PATH", "LD_PRELOAD"] {
            assert_eq!(role(name), VariableRole::Engine, "{name}");
        }
        for name in ["LANG", "TERM", "SHELL", "SSL_CERT_FILE", "PGHOST", "TZ", "LC_ALL"] {
            assert_eq!(role(name), VariableRole::Cells, "{name}");
        }
        for name in ["JPY_PARENT_PID", "PWD", "PLUMBLINE_STANDBY_IDLE_MINUTES", "EVCXR_TMPDIR"] {
            assert_eq!(role(name), VariableRole::PerLaunch, "{name}");
        }
    }

    #[test]
    fn a_launcher_setting_sets_what_differs_and_removes_what_it_lacks() {
        let standby = environment(&[("LANG", "C.UTF-8"), ("TERM", "xterm"), ("HOME", "/h"), ("JPY_X", "1")]);
        let launcher = environment(&[("LANG", "de_DE.UTF-8"), ("SHELL", "/bin/zsh"), ("HOME", "/h"), ("JPY_X", "2")]);
        assert_eq!(
            launcher_setting(&standby, &launcher),
            vec![
                ("LANG".to_string(), Some("de_DE.UTF-8".to_string())),
                ("SHELL".to_string(), Some("/bin/zsh".to_string())),
                ("TERM".to_string(), None),
            ]
        );
        assert!(differences(VariableRole::Engine, &standby, &launcher).is_empty());
    }
}
