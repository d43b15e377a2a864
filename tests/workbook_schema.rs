//! The schema (`workbook::schema`) and the format page agree: every sheet, key and column the
//! program reads is documented in docs/workbook-format.md, with its plausible range as the
//! parser quotes it.

use dampfront::workbook::schema::{self, Layout};

fn page() -> String {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    std::fs::read_to_string(root.join("docs/workbook-format.md")).expect("format page")
}

/// A number as range messages show it.
fn short(x: f64) -> String {
    if x != 0.0 && !(1e-4..1e7).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

#[test]
fn every_sheet_key_and_column_of_the_schema_is_on_the_format_page() {
    let page = page();
    for sheet in schema::SHEETS {
        let heading = format!("### `{}`", sheet.name);
        assert!(page.contains(&heading), "{heading}");
        for f in sheet.fields {
            assert!(
                page.contains(&format!("`{}`", f.name)),
                "{}.{} is not on the format page",
                sheet.name,
                f.name
            );
        }
        let layout = match sheet.layout {
            Layout::Keys => "key sheet",
            Layout::Table => "table sheet",
        };
        let line = page
            .lines()
            .find(|l| l.starts_with(&heading))
            .unwrap_or_default();
        assert!(line.contains(layout), "{line} is a {layout}");
    }
}

#[test]
fn the_plausible_ranges_on_the_format_page_are_the_parsers() {
    let page = page();
    for sheet in schema::SHEETS {
        for f in sheet.fields {
            if let Some((lo, hi)) = f.user_range() {
                let text = format!(
                    "| `{}` | {} to {} | {} |",
                    f.name,
                    short(lo),
                    short(hi),
                    f.unit
                );
                assert!(page.contains(&text), "{text} is not on the format page");
            }
        }
    }
}
