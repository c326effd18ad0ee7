//! Display commands from cells, as protocol messages.
//!
//! `plumbline::render` writes a [`DisplayCommand`] on one output line; this
//! module reads it back through that same type and says which message the
//! protocol uses for it (`display_data`, `update_display_data`,
//! `clear_output`), so the kernel and the runner agree.

use super::cell::bundle_json;
pub use plumbline::render::DisplayCommand;
use serde_json::{json, Value};

/// The display command an output line carries, if any.
pub fn display_command(line: &str) -> Option<DisplayCommand> {
    DisplayCommand::from_line(line)
}

/// The iopub message type and content for `command`.
pub fn display_message(command: DisplayCommand) -> (&'static str, Value) {
    match command {
        DisplayCommand::Show { data, display_id } => {
            let transient = display_id.map_or_else(|| json!({}), |id| json!({ "display_id": id }));
            ("display_data", json!({ "data": bundle_json(data), "metadata": {}, "transient": transient }))
        }
        DisplayCommand::Update { data, display_id } => (
            "update_display_data",
            json!({ "data": bundle_json(data), "metadata": {}, "transient": { "display_id": display_id } }),
        ),
        DisplayCommand::Clear { wait } => ("clear_output", json!({ "wait": wait })),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    #[test]
    fn updates_carry_their_display_id() {
        let mut data = BTreeMap::new();
        data.insert("text/plain".to_string(), "2 of 5".to_string());
        let (kind, content) = display_message(DisplayCommand::Update { data, display_id: "p-7".into() });
        assert_eq!(kind, "update_display_data");
        assert_eq!(content["transient"]["display_id"], "p-7");
        assert_eq!(content["data"]["text/plain"], "2 of 5");
        assert_eq!(display_message(DisplayCommand::Clear { wait: false }).0, "clear_output");
    }
}
